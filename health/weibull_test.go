package health

import "flag"

// The -update flag rewrites golden files under testdata/. It is defined
// here, in the package's last test file by name, only when no other test
// file of the package has defined it already (package-level variables
// initialise file by file in name order), so parallel work on other files
// can share one flag; goldenUpdate in enclosure_test.go reads it.
var _ = defineUpdateFlag()

func defineUpdateFlag() bool {
	if flag.Lookup("update") == nil {
		flag.Bool("update", false, "rewrite golden files under testdata/")
	}
	return true
}
