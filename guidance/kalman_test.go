package guidance_test

import (
	"math"
	"testing"

	"github.com/hewline/hewline/guidance"
)

// kalataGains is the closed-form steady state of the alpha-beta filter from
// Kalata, "The Tracking Index: A Generalized Parameter for α-β and α-β-γ
// Target Trackers", IEEE TAES 20(2):174–182, 1984 (formula as given in
// /work/shared/REFERENCES.md "Estimation"). It is the outside check for
// SteadyStateGains, which iterates the filter's own Riccati equation.
func kalataGains(lambda float64) (alpha, beta float64) {
	r := (4 + lambda - math.Sqrt(8*lambda+lambda*lambda)) / 4
	alpha = 1 - r*r
	beta = 2*(2-alpha) - 4*math.Sqrt(1-alpha)
	return alpha, beta
}

func TestSteadyStateGainsKalata(t *testing.T) {
	// Check values: Kalata 1984 (published formula), values listed in
	// REFERENCES.md "Estimation". Λ = 1 gives exactly α = 0.75, β = 0.5.
	tests := map[string]struct {
		lambda, alpha, beta, tol float64
	}{
		"lambda 1 (exact)": {1, 0.75, 0.5, 1e-6},
		"lambda 0.05":      {0.05, 0.270867, 0.042695, 1e-6},
		"lambda 0.5":       {0.5, 0.628373, 0.304806, 1e-6},
		"lambda 2":         {2, 0.854102, 0.763932, 1e-6},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			a, b := guidance.SteadyStateGains(tc.lambda)
			if math.Abs(a-tc.alpha) > tc.tol || math.Abs(b-tc.beta) > tc.tol {
				t.Errorf("SteadyStateGains(%v) = α %.7f, β %.7f; want α %.6f, β %.6f (Kalata 1984)",
					tc.lambda, a, b, tc.alpha, tc.beta)
			}
			ka, kb := kalataGains(tc.lambda)
			if math.Abs(a-ka) > 1e-9 || math.Abs(b-kb) > 1e-9 {
				t.Errorf("SteadyStateGains(%v) = α %.10f, β %.10f; Kalata closed form gives α %.10f, β %.10f",
					tc.lambda, a, b, ka, kb)
			}
		})
	}
}

func TestSteadyStateGainsSweep(t *testing.T) {
	// Kalata's closed form over a wider range of tracking indices.
	for _, lambda := range []float64{0.01, 0.1, 0.3, 0.7, 1.5, 3, 5, 10} {
		a, b := guidance.SteadyStateGains(lambda)
		ka, kb := kalataGains(lambda)
		if math.Abs(a-ka) > 1e-8 || math.Abs(b-kb) > 1e-8 {
			t.Errorf("Λ=%v: Riccati α %.10f β %.10f, Kalata α %.10f β %.10f", lambda, a, b, ka, kb)
		}
	}
}

func TestSteadyStateGainsBadLambda(t *testing.T) {
	for _, lambda := range []float64{0, -1, math.NaN(), math.Inf(1)} {
		if a, b := guidance.SteadyStateGains(lambda); !math.IsNaN(a) || !math.IsNaN(b) {
			t.Errorf("SteadyStateGains(%v) = %v, %v; want NaN, NaN", lambda, a, b)
		}
	}
}

func TestKalmanCVPredictAddsDiscreteWhiteNoiseQ(t *testing.T) {
	// From a certain state (P = 0) one prediction over T gives
	// P = Q = σa²·[[T⁴/4, T³/2], [T³/2, T²]] (discrete white-noise
	// acceleration model, Bar-Shalom et al.; REFERENCES.md "Estimation"),
	// and x = F·x with F = [[1, T], [0, 1]].
	k := guidance.NewKalmanCV(3, 1)
	k.Init(10, 0)
	k.X[1] = 2
	k.P = [2][2]float64{}
	T := 0.5
	k.Predict(T)
	q := 9.0
	want := [2][2]float64{{q * T * T * T * T / 4, q * T * T * T / 2}, {q * T * T * T / 2, q * T * T}}
	for i := range 2 {
		for j := range 2 {
			if math.Abs(k.P[i][j]-want[i][j]) > 1e-12 {
				t.Errorf("P[%d][%d] = %v, want %v", i, j, k.P[i][j], want[i][j])
			}
		}
	}
	if k.X != [2]float64{11, 2} {
		t.Errorf("x = %v, want [11 2]", k.X)
	}
}

func TestChiSquareQuantile(t *testing.T) {
	// Standard chi-square tables (REFERENCES.md "Estimation").
	tests := map[string]struct {
		p    float64
		dof  int
		want float64
	}{
		"1 dof 95%":   {0.95, 1, 3.841},
		"1 dof 99%":   {0.99, 1, 6.635},
		"1 dof 99.9%": {0.999, 1, 10.828},
		"2 dof 95%":   {0.95, 2, 5.991},
		"2 dof 99%":   {0.99, 2, 9.210},
		"2 dof 99.9%": {0.999, 2, 13.816},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			got := guidance.ChiSquareQuantile(tc.p, tc.dof)
			if math.Abs(got-tc.want) > 0.0006 {
				t.Errorf("ChiSquareQuantile(%v, %d) = %.4f, want %.3f", tc.p, tc.dof, got, tc.want)
			}
		})
	}
	for _, bad := range []struct {
		p   float64
		dof int
	}{{0, 1}, {1, 1}, {0.5, 0}, {math.NaN(), 2}} {
		if got := guidance.ChiSquareQuantile(bad.p, bad.dof); !math.IsNaN(got) {
			t.Errorf("ChiSquareQuantile(%v, %d) = %v, want NaN", bad.p, bad.dof, got)
		}
	}
}
