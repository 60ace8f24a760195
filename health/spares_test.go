package health

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestPoissonCDFAgainstGonum uses gonum's distuv.Poisson CDF as the
// reference.
func TestPoissonCDFAgainstGonum(t *testing.T) {
	for _, lambda := range []float64{0.01, 0.3, 1, 2, 4.5, 10, 37.2, 150, 900} {
		ref := distuv.Poisson{Lambda: lambda}
		for k := 0; k <= int(lambda+8*math.Sqrt(lambda))+5; k++ {
			got, want := PoissonCDF(k, lambda), ref.CDF(float64(k))
			if !near(got, want, 1e-12) {
				t.Errorf("PoissonCDF(%d, %v) = %.15g, gonum %.15g", k, lambda, got, want)
			}
		}
	}
	if got := PoissonCDF(1<<40, 2); !near(got, 1, 1e-15) { // returns at once: the tail stops the sum
		t.Errorf("far tail P(N<=2^40 | λ=2) = %v, want 1", got)
	}
	if PoissonCDF(-1, 3) != 0 || PoissonCDF(0, 0) != 1 || PoissonCDF(5, 0) != 1 {
		t.Error("edge cases of PoissonCDF")
	}
}

// TestPoissonCDFTable checks cumulative Poisson table values as printed in
// statistics textbooks' cumulative Poisson tables (four decimals; from
// memory).
func TestPoissonCDFTable(t *testing.T) {
	for _, c := range []struct {
		k      int
		lambda float64
		want   float64
	}{
		{0, 1, 0.3679}, {1, 1, 0.7358}, {2, 1, 0.9197}, {3, 1, 0.9810},
		{0, 2, 0.1353}, {1, 2, 0.4060}, {2, 2, 0.6767}, {3, 2, 0.8571}, {4, 2, 0.9473}, {5, 2, 0.9834},
		{5, 5, 0.6160}, {8, 5, 0.9319}, {9, 5, 0.9682}, {10, 5, 0.9863},
	} {
		if got := PoissonCDF(c.k, c.lambda); !near(got, c.want, 5e-5) {
			t.Errorf("P(N<=%d | λ=%v) = %.5f, table %.4f", c.k, c.lambda, got, c.want)
		}
	}
}

func TestSparesToHold(t *testing.T) {
	// Hand values from the table above: λ = 2 at 95 % needs 5 (0.9473 at 4
	// falls short, 0.9834 at 5 does not); λ = 1 at 90 % needs 2 (0.9197);
	// λ = 1 at 95 % needs 3 (0.9810); λ = 5 at 95 % needs 9 (0.9682).
	for _, c := range []struct {
		lambda, level float64
		onHand        int
		hold          int
		shortfall     int
	}{
		{2, 0.95, 3, 5, 2},
		{1, 0.90, 2, 2, 0},
		{1, 0.95, 0, 3, 3},
		{5, 0.95, 12, 9, 0},
		{0, 0.99, 0, 0, 0},
	} {
		p, err := SparesToHold(c.lambda, c.level, c.onHand)
		if err != nil {
			t.Fatal(err)
		}
		if p.Hold != c.hold || p.Shortfall != c.shortfall {
			t.Errorf("λ=%v level %v on hand %d: hold %d shortfall %d, want %d and %d", c.lambda, c.level, c.onHand, p.Hold, p.Shortfall, c.hold, c.shortfall)
		}
		ref := distuv.Poisson{Lambda: c.lambda}
		if c.lambda > 0 && (!near(p.HoldLevel, ref.CDF(float64(p.Hold)), 1e-12) || !near(p.OnHandLevel, ref.CDF(float64(c.onHand)), 1e-12)) {
			t.Errorf("levels %v, %v disagree with gonum", p.HoldLevel, p.OnHandLevel)
		}
	}
}

// TestSparesToHoldIsSmallest: for many λ and levels, Hold meets the level
// and Hold-1 does not (gonum's Poisson CDF as the reference).
func TestSparesToHoldIsSmallest(t *testing.T) {
	for _, lambda := range []float64{0.05, 0.5, 1.7, 3, 8.25, 20, 64, 400} {
		ref := distuv.Poisson{Lambda: lambda}
		for _, level := range []float64{0.5, 0.8, 0.9, 0.95, 0.99, 0.999, 0.99999} {
			p, err := SparesToHold(lambda, level, 0)
			if err != nil {
				t.Fatal(err)
			}
			if ref.CDF(float64(p.Hold)) < level-1e-12 {
				t.Errorf("λ=%v level %v: hold %d gives only %v", lambda, level, p.Hold, ref.CDF(float64(p.Hold)))
			}
			if p.Hold > 0 && ref.CDF(float64(p.Hold-1)) >= level+1e-12 {
				t.Errorf("λ=%v level %v: hold %d is not the smallest", lambda, level, p.Hold)
			}
		}
	}
}

func TestSparesToHoldErrors(t *testing.T) {
	for _, c := range []struct {
		lambda, level float64
		onHand        int
	}{
		{-1, 0.9, 0}, {math.NaN(), 0.9, 0}, {math.Inf(1), 0.9, 0},
		{1, 0, 0}, {1, 1, 0}, {1, 1.2, 0}, {1, math.NaN(), 0}, {1, 0.9, -2},
	} {
		if _, err := SparesToHold(c.lambda, c.level, c.onHand); err == nil {
			t.Errorf("SparesToHold(%v, %v, %d) gave no error", c.lambda, c.level, c.onHand)
		}
	}
}

// TestSparesFromWeibull ties the two models: a fleet of running units, the
// demand over a 90-day lead time from the Weibull fit, then spares.
func TestSparesFromWeibull(t *testing.T) {
	w := Weibull{Shape: 1, Scale: 10 * 8760} // mean life 10 years
	ages := make([]float64, 100)
	lead := 90 * 24.0
	lambda := w.ExpectedFailures(ages, lead)
	// Shape 1: each unit fails within the lead time with 1 - e^(-2160/87600).
	want := 100 * (1 - math.Exp(-lead/(10*8760)))
	if !near(lambda, want, 1e-9) {
		t.Fatalf("demand %v, want %v", lambda, want)
	}
	p, err := SparesToHold(lambda, 0.95, 1)
	if err != nil {
		t.Fatal(err)
	}
	if ref := (distuv.Poisson{Lambda: lambda}); ref.CDF(float64(p.Hold)) < 0.95 || ref.CDF(float64(p.Hold-1)) >= 0.95 {
		t.Errorf("hold %d for λ %v", p.Hold, lambda)
	}
}
