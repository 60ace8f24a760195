module kelvard

go 1.26.8
