package health

import (
	"flag"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
	"gonum.org/v1/gonum/stat/distuv"
)

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

func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

func failuresOnly(ages []float64) []LifeRecord {
	out := make([]LifeRecord, len(ages))
	for i, a := range ages {
		out[i] = LifeRecord{AgeH: a, Failed: true}
	}
	return out
}

// nagG07beData is the example data set of the NAG Library Manual, g07be
// example (nag_univar_estim_weibull, example program data: 20 uncensored
// observations).
var nagG07beData = []float64{1.1, 1.4, 1.3, 1.7, 1.9, 1.8, 1.6, 2.2, 1.7, 2.7,
	4.1, 1.8, 1.5, 1.2, 1.4, 3.0, 1.7, 2.3, 1.6, 2.0}

// ovarianData is R's survival::ovarian data set (Edmonson et al., 1979; R
// survival package documentation): futime in days and fustat (1 = death,
// 0 = censored) for 26 patients, in the package's row order.
func ovarianData() []LifeRecord {
	futime := []float64{59, 115, 156, 421, 431, 448, 464, 475, 477, 563, 638, 744, 769,
		770, 803, 855, 1040, 1106, 1129, 1206, 1227, 268, 329, 353, 365, 377}
	fustat := []int{1, 1, 1, 0, 1, 0, 1, 1, 0, 1, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 0}
	out := make([]LifeRecord, len(futime))
	for i := range futime {
		out[i] = LifeRecord{AgeH: futime[i], Failed: fustat[i] == 1}
	}
	return out
}

func mustFit(t *testing.T, data []LifeRecord, opt WeibullOptions) *WeibullFit {
	t.Helper()
	r, err := FitWeibull(data, opt)
	if err != nil {
		t.Fatal(err)
	}
	if r.Status != WeibullFitted || r.Fit == nil {
		t.Fatalf("no fit: %+v", r)
	}
	return r.Fit
}

// TestFitWeibullNAG checks the NAG Library Manual, g07be example: NAG fits
// S(x) = exp(-λ x^γ) and reports log λ = -2.1073 (standard error 0.4627) and
// γ = 2.7870 (standard error 0.4273). Here γ is the shape and
// λ = η^(-γ), so the scale is λ^(-1/γ) ≈ 2.1300. The standard errors test
// the observed information behind the Fisher-matrix bounds.
func TestFitWeibullNAG(t *testing.T) {
	f := mustFit(t, failuresOnly(nagG07beData), WeibullOptions{})
	logLambda := -f.Shape * math.Log(f.Scale)
	if !near(f.Shape, 2.7870, 5e-5) || !near(logLambda, -2.1073, 5e-5) || !near(f.Scale, 2.1300, 5e-5) {
		t.Errorf("shape %.5f log λ %.5f scale %.5f; NAG g07be gives 2.7870, -2.1073, 2.1300", f.Shape, logLambda, f.Scale)
	}
	// Delta method from the (ln η, ln β) covariance to NAG's (γ, log λ).
	u, g := math.Log(f.Scale), f.Shape
	varG := g * g * f.VarLogShape
	covGU := g * f.CovLogScaleShape
	varLogLambda := u*u*varG + g*g*f.VarLogScale + 2*u*g*covGU
	if !near(math.Sqrt(varG), 0.4273, 5e-5) || !near(math.Sqrt(varLogLambda), 0.4627, 5e-5) {
		t.Errorf("standard errors γ %.5f, log λ %.5f; NAG g07be gives 0.4273, 0.4627", math.Sqrt(varG), math.Sqrt(varLogLambda))
	}
	if f.ShapeBounds.Lower >= f.Shape || f.ShapeBounds.Upper <= f.Shape ||
		f.ScaleBounds.Lower >= f.Scale || f.ScaleBounds.Upper <= f.Scale ||
		f.B10Bounds.Lower >= f.B10H || f.B10Bounds.Upper <= f.B10H {
		t.Errorf("bounds do not straddle the estimates: %+v", f)
	}
}

// TestFitWeibullOvarian checks R's survival::ovarian data (12 deaths, 14
// censored): survreg(Surv(futime, fustat) ~ 1, dist = "weibull") reports
// Intercept 7.111 and Scale 0.902, that is shape 1/0.902 ≈ 1.108 and scale
// exp(7.111) ≈ 1225 (survreg's scale is 1/shape, its intercept ln η).
func TestFitWeibullOvarian(t *testing.T) {
	data := ovarianData()
	r, err := FitWeibull(data, WeibullOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if r.Failures != 12 || r.Suspensions != 14 {
		t.Fatalf("counted %d failures and %d suspensions, want 12 and 14", r.Failures, r.Suspensions)
	}
	f := r.Fit
	if !near(1/f.Shape, 0.902, 5e-4) || !near(math.Log(f.Scale), 7.111, 5e-4) {
		t.Errorf("survreg scale %.4f intercept %.4f; R gives 0.902 and 7.111", 1/f.Shape, math.Log(f.Scale))
	}
	if !near(f.Shape, 1.108, 1e-3) || !near(f.Scale, 1225, 1) {
		t.Errorf("shape %.4f scale %.1f; want about 1.108 and 1225", f.Shape, f.Scale)
	}
}

// refNegLogLik is the censored Weibull negative log-likelihood in
// x = (ln β, ln η), written out again for the gonum cross-checks.
func refNegLogLik(data []LifeRecord) func(x []float64) float64 {
	return func(x []float64) float64 {
		b, eta := math.Exp(x[0]), math.Exp(x[1])
		ll := 0.0
		for _, d := range data {
			z := d.AgeH / eta
			if d.Failed {
				ll += math.Log(b/eta) + (b-1)*math.Log(z)
			}
			ll -= math.Pow(z, b)
		}
		return -ll
	}
}

// refNegLogLikGrad is the gradient of refNegLogLik: with z = (t/η)^β and
// r failures, d(-ℓ)/d ln η = rβ - βΣz and
// d(-ℓ)/d ln β = -β[r/β + Σ_failures ln(t/η) - Σ z ln(t/η)].
func refNegLogLikGrad(data []LifeRecord) func(grad, x []float64) {
	return func(grad, x []float64) {
		b, eta := math.Exp(x[0]), math.Exp(x[1])
		var r, sz, sFail, szl float64
		for _, d := range data {
			l := math.Log(d.AgeH / eta)
			z := math.Pow(d.AgeH/eta, b)
			if d.Failed {
				r++
				sFail += l
			}
			sz += z
			szl += z * l
		}
		grad[0] = -b * (r/b + sFail - szl)
		grad[1] = r*b - b*sz
	}
}

func censoredSample(seed uint64, n int, shape, scale, censorAt float64) []LifeRecord {
	rng := rand.New(rand.NewPCG(seed, 7))
	out := make([]LifeRecord, n)
	for i := range out {
		life := scale * math.Pow(-math.Log(1-rng.Float64()), 1/shape)
		stop := censorAt * (0.5 + rng.Float64()) // staggered entry
		if life <= stop {
			out[i] = LifeRecord{AgeH: life, Failed: true}
		} else {
			out[i] = LifeRecord{AgeH: stop}
		}
	}
	return out
}

// TestFitWeibullAgainstGonumOptimize maximises the same likelihood with
// gonum's optimize (BFGS, gradient by gonum's fd) and compares the estimate,
// the log-likelihood and, through gonum's fd.Hessian and mat inverse, the
// covariance behind the bounds.
func TestFitWeibullAgainstGonumOptimize(t *testing.T) {
	sets := map[string][]LifeRecord{
		"nag g07be":      failuresOnly(nagG07beData),
		"ovarian":        ovarianData(),
		"censored β=0.7": censoredSample(1, 60, 0.7, 40000, 30000),
		"censored β=3.5": censoredSample(2, 200, 3.5, 60000, 50000),
	}
	for name, data := range sets {
		t.Run(name, func(t *testing.T) {
			f := mustFit(t, data, WeibullOptions{})
			nll := refNegLogLik(data)
			p := optimize.Problem{Func: nll, Grad: refNegLogLikGrad(data)}
			// Start away from the answer: shape 1, scale the mean age.
			mean := 0.0
			for _, d := range data {
				mean += d.AgeH
			}
			mean /= float64(len(data))
			res, err := optimize.Minimize(p, []float64{0, math.Log(mean)}, &optimize.Settings{GradientThreshold: 1e-8}, &optimize.BFGS{})
			if err != nil {
				t.Fatalf("gonum optimize: %v", err)
			}
			gShape, gScale := math.Exp(res.X[0]), math.Exp(res.X[1])
			if !near(gShape/f.Shape, 1, 1e-5) || !near(gScale/f.Scale, 1, 1e-5) {
				t.Errorf("kelvard β %.7g η %.7g, gonum β %.7g η %.7g", f.Shape, f.Scale, gShape, gScale)
			}
			if !near(-res.F, f.LogLikelihood, 1e-7*math.Abs(f.LogLikelihood)) {
				t.Errorf("log-likelihood %.10g, gonum %.10g", f.LogLikelihood, -res.F)
			}
			if ll := WeibullLogLikelihood(data, f.Weibull); !near(ll, f.LogLikelihood, 1e-9*math.Abs(ll)) {
				t.Errorf("WeibullLogLikelihood %.10g vs fit %.10g", ll, f.LogLikelihood)
			}
			// Covariance of (ln η, ln β): invert gonum's numeric Hessian of
			// the negative log-likelihood in (ln η, ln β).
			swapped := func(x []float64) float64 { return nll([]float64{x[1], x[0]}) }
			h := mat.NewSymDense(2, nil)
			fd.Hessian(h, swapped, []float64{math.Log(f.Scale), math.Log(f.Shape)}, &fd.Settings{Formula: fd.Central, Step: 1e-4})
			var cov mat.Dense
			if err := cov.Inverse(h); err != nil {
				t.Fatal(err)
			}
			for _, c := range []struct {
				name      string
				got, want float64
			}{
				{"var ln η", f.VarLogScale, cov.At(0, 0)},
				{"cov", f.CovLogScaleShape, cov.At(0, 1)},
				{"var ln β", f.VarLogShape, cov.At(1, 1)},
			} {
				if !near(c.got, c.want, 1e-5*(math.Abs(f.VarLogScale)+math.Abs(f.VarLogShape))) {
					t.Errorf("%s = %.6g, gonum fd.Hessian gives %.6g", c.name, c.got, c.want)
				}
			}
		})
	}
}

func TestFitWeibullBounds(t *testing.T) {
	data := censoredSample(3, 80, 2.2, 50000, 40000)
	f90 := mustFit(t, data, WeibullOptions{Confidence: 0.90})
	f95 := mustFit(t, data, WeibullOptions{Confidence: 0.95})
	if f90.Shape != f95.Shape || f90.Scale != f95.Scale {
		t.Fatal("the confidence level changed the estimate")
	}
	// z for 90 % two-sided is the normal 95th percentile; the bounds are
	// exp(±z se) in ln β (gonum's distuv.UnitNormal as the reference).
	z := distuv.UnitNormal.Quantile(0.95)
	want := f90.Shape * math.Exp(z*math.Sqrt(f90.VarLogShape))
	if !near(f90.ShapeBounds.Upper, want, 1e-9*want) {
		t.Errorf("upper shape bound %.9g, want %.9g", f90.ShapeBounds.Upper, want)
	}
	for _, pair := range [][2]Bounds{{f90.ShapeBounds, f95.ShapeBounds}, {f90.ScaleBounds, f95.ScaleBounds}, {f90.B10Bounds, f95.B10Bounds}} {
		if !(pair[1].Lower < pair[0].Lower && pair[1].Upper > pair[0].Upper) {
			t.Errorf("95 %% bounds %+v not wider than 90 %% bounds %+v", pair[1], pair[0])
		}
	}
	// The B10 estimate is η (-ln 0.9)^(1/β).
	if !near(f90.B10H, f90.Scale*math.Pow(-math.Log(0.9), 1/f90.Shape), 1e-9*f90.B10H) {
		t.Errorf("B10 %.6g inconsistent with β and η", f90.B10H)
	}
	if _, err := FitWeibull(data, WeibullOptions{Confidence: 1.5}); err == nil {
		t.Error("confidence 1.5 accepted")
	}
}

func TestFitWeibullInsufficientAndInvalid(t *testing.T) {
	two := []LifeRecord{{AgeH: 100, Failed: true}, {AgeH: 300, Failed: true}, {AgeH: 500}, {AgeH: 700}}
	r, err := FitWeibull(two, WeibullOptions{})
	if err != nil || r.Status != WeibullInsufficient || r.Fit != nil || r.Failures != 2 || r.Suspensions != 2 || r.MinFailures != 3 {
		t.Errorf("two failures: %+v, %v; want insufficient_failures with counts", r, err)
	}
	three := append(two, LifeRecord{AgeH: 400, Failed: true})
	r, err = FitWeibull(three, WeibullOptions{MinFailures: 5})
	if err != nil || r.Status != WeibullInsufficient {
		t.Errorf("MinFailures 5 with three failures: %+v, %v", r, err)
	}
	r, err = FitWeibull(three, WeibullOptions{})
	if err != nil || r.Status != WeibullFitted {
		t.Errorf("three failures: %+v, %v", r, err)
	}
	for name, bad := range map[string][]LifeRecord{
		"negative age":     {{AgeH: -1, Failed: true}, {AgeH: 2, Failed: true}, {AgeH: 3, Failed: true}},
		"NaN age":          {{AgeH: math.NaN()}, {AgeH: 2, Failed: true}, {AgeH: 3, Failed: true}, {AgeH: 4, Failed: true}},
		"failure at 0":     {{AgeH: 0, Failed: true}, {AgeH: 2, Failed: true}, {AgeH: 3, Failed: true}},
		"all at max age":   {{AgeH: 5, Failed: true}, {AgeH: 5, Failed: true}, {AgeH: 5, Failed: true}, {AgeH: 1}},
		"infinite age":     {{AgeH: math.Inf(1)}, {AgeH: 2, Failed: true}, {AgeH: 3, Failed: true}, {AgeH: 4, Failed: true}},
		"failures at max ": {{AgeH: 9, Failed: true}, {AgeH: 9, Failed: true}, {AgeH: 9, Failed: true}, {AgeH: 9}},
	} {
		if r, err := FitWeibull(bad, WeibullOptions{}); err == nil {
			t.Errorf("%s: no error, got %+v", name, r)
		}
	}
	// Suspensions at age 0 carry no information and do not change the fit.
	base := mustFit(t, ovarianData(), WeibullOptions{})
	withZero := mustFit(t, append(ovarianData(), LifeRecord{AgeH: 0}), WeibullOptions{})
	if !near(base.Shape, withZero.Shape, 1e-12) || !near(base.Scale, withZero.Scale, 1e-9) {
		t.Error("a suspension at age 0 changed the fit")
	}
}

func TestLifeRecordsPerMode(t *testing.T) {
	units := []UnitHistory{
		{Key: "A", AgeH: 1000, Failed: true, Mode: FailureCapacitors},
		{Key: "B", AgeH: 2000, Failed: true, Mode: FailureFan},
		{Key: "C", AgeH: 3000},
		{Key: "D", AgeH: 4000, Failed: true, Mode: FailureCapacitors},
	}
	got := LifeRecords(units, FailureCapacitors)
	want := []LifeRecord{{1000, true}, {2000, false}, {3000, false}, {4000, true}}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("capacitor records[%d] = %+v, want %+v", i, got[i], want[i])
		}
	}
	all := LifeRecords(units, "")
	if !all[0].Failed || !all[1].Failed || all[2].Failed || !all[3].Failed {
		t.Errorf("all-modes records %+v", all)
	}
}

// TestMedianRanksJohnson is a hand-worked example of Johnson's adjusted
// ranks with Benard's median rank. n = 5 units sorted by age:
//
//	pos 1: failure at 100, reverse rank 5: rank = 0 + (6 - 0)/(1 + 5) = 1
//	       median rank (1 - 0.3)/(5 + 0.4) = 0.7/5.4 = 0.129630
//	pos 2: suspension at 150
//	pos 3: failure at 200, reverse rank 3: rank = 1 + (6 - 1)/(1 + 3) = 2.25
//	       median rank 1.95/5.4 = 0.361111
//	pos 4: failure at 300, reverse rank 2: rank = 2.25 + (6 - 2.25)/(1 + 2) = 3.5
//	       median rank 3.2/5.4 = 0.592593
//	pos 5: suspension at 400
func TestMedianRanksJohnson(t *testing.T) {
	data := []LifeRecord{{AgeH: 300, Failed: true}, {AgeH: 150}, {AgeH: 400}, {AgeH: 100, Failed: true}, {AgeH: 200, Failed: true}}
	got := MedianRanks(data)
	want := []PlotPoint{
		{AgeH: 100, Rank: 1, MedianRank: 0.7 / 5.4},
		{AgeH: 200, Rank: 2.25, MedianRank: 1.95 / 5.4},
		{AgeH: 300, Rank: 3.5, MedianRank: 3.2 / 5.4},
	}
	if len(got) != len(want) {
		t.Fatalf("%d points, want %d", len(got), len(want))
	}
	for i, w := range want {
		g := got[i]
		if g.AgeH != w.AgeH || !near(g.Rank, w.Rank, 1e-12) || !near(g.MedianRank, w.MedianRank, 1e-12) {
			t.Errorf("point %d = %+v, want %+v", i, g, w)
		}
		if !near(g.X, math.Log(w.AgeH), 1e-12) || !near(g.Y, math.Log(-math.Log(1-w.MedianRank)), 1e-12) {
			t.Errorf("point %d plot coordinates (%v, %v)", i, g.X, g.Y)
		}
	}
	// Without suspensions the ranks are the order numbers: Benard for n = 4
	// gives (1-0.3)/4.4 = 0.159091 for the first failure.
	plain := MedianRanks(failuresOnly([]float64{40, 10, 30, 20}))
	for i, p := range plain {
		if p.Rank != float64(i+1) || p.AgeH != float64(10*(i+1)) {
			t.Errorf("plain point %d = %+v", i, p)
		}
	}
	if !near(plain[0].MedianRank, 0.159091, 5e-7) {
		t.Errorf("Benard first rank n=4: %v", plain[0].MedianRank)
	}
	// A failure and a suspension at the same age: the failure ranks first.
	tie := MedianRanks([]LifeRecord{{AgeH: 50}, {AgeH: 50, Failed: true}})
	if len(tie) != 1 || tie[0].Rank != 1 {
		t.Errorf("tie handling: %+v", tie)
	}
}

// TestWeibullForecasts checks the reliability algebra by hand.
func TestWeibullForecasts(t *testing.T) {
	w := Weibull{Shape: 2, Scale: 1000}
	// B10 = 1000 × sqrt(-ln 0.9) = 1000 × sqrt(0.1053605) = 324.59 h.
	if !near(w.BLife(0.10), 324.593, 1e-3) {
		t.Errorf("B10 = %v, want 324.593", w.BLife(0.10))
	}
	// R(1000) = e^-1 = 0.367879.
	if !near(w.Reliability(1000), math.Exp(-1), 1e-15) || w.Reliability(0) != 1 {
		t.Errorf("reliability %v", w.Reliability(1000))
	}
	// Survived to 500 h, next 500 h: 1 - exp(0.25 - 1) = 1 - e^-0.75 = 0.527633.
	if got := w.ConditionalFailure(500, 500); !near(got, 0.527633, 1e-6) {
		t.Errorf("conditional failure %v, want 0.527633", got)
	}
	// A new unit: the plain CDF, 1 - e^-0.25 = 0.221199.
	if got := w.ConditionalFailure(0, 500); !near(got, 0.221199, 1e-6) {
		t.Errorf("new unit %v, want 0.221199", got)
	}
	// Shape 1 is memoryless: the same probability at every age.
	e := Weibull{Shape: 1, Scale: 8760}
	for _, age := range []float64{0, 1e3, 5e4, 2e5} {
		if got := e.ConditionalFailure(age, 8760); !near(got, 1-math.Exp(-1), 1e-12) {
			t.Errorf("exponential at age %v: %v", age, got)
		}
	}
	if w.ConditionalFailure(500, 0) != 0 {
		t.Error("zero horizon must give zero")
	}
	// Tiny probabilities keep their digits: β=1, Δ = 1e-9 η gives ≈ 1e-9.
	if got := e.ConditionalFailure(100, 8760e-9); !near(got/1e-9, 1, 1e-6) {
		t.Errorf("small probability %v", got)
	}
	// Expected failures: the sum, 0.221199 + 0.527633 = 0.748832.
	if got := w.ExpectedFailures([]float64{0, 500}, 500); !near(got, 0.748832, 2e-6) {
		t.Errorf("expected failures %v, want 0.748832", got)
	}
}
