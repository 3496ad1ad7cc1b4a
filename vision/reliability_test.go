package vision

import (
	"math"
	"testing"
)

func TestReliabilityArithmetic(t *testing.T) {
	// Worked by hand: bin [0, 0.5) holds 0.2 (wrong) and 0.4 (right):
	// mean 0.3, accuracy 0.5; bin [0.5, 1] holds 0.9, 1.0 (right) and 0.8
	// (wrong): mean 0.9, accuracy 2/3. ECE = 2/5·0.2 + 3/5·(0.9 − 2/3) = 0.22.
	conf := []float64{0.2, 0.4, 0.9, 1.0, 0.8}
	ok := []bool{false, true, true, true, false}
	table, ece, err := Reliability(conf, ok, 2)
	if err != nil {
		t.Fatal(err)
	}
	if table[0].N != 2 || table[1].N != 3 {
		t.Fatalf("counts %d, %d", table[0].N, table[1].N)
	}
	near := func(a, b float64) bool { return math.Abs(a-b) < 1e-12 }
	if !near(table[0].MeanConfidence, 0.3) || !near(table[0].Accuracy, 0.5) ||
		!near(table[1].MeanConfidence, 0.9) || !near(table[1].Accuracy, 2.0/3) {
		t.Errorf("table %+v", table)
	}
	if !near(ece, 0.22) {
		t.Errorf("ECE %v, want 0.22", ece)
	}
	if _, _, err := Reliability([]float64{0.5}, nil, 10); err == nil {
		t.Error("length mismatch accepted")
	}
	if _, _, err := Reliability([]float64{1.5}, []bool{true}, 10); err == nil {
		t.Error("confidence 1.5 accepted")
	}
}

// On the rendered gap clip (every frame where something was found, right
// or wrong), detections stated with confidence ≥ 0.5 must be right at
// least 95 % of the time and the expected calibration error must stay
// under 0.1: the confidence must mean something.
func TestConfidenceMeansSomething(t *testing.T) {
	s := cachedScore(t, "gap", 2)
	table, ece, err := Reliability(s.conf, s.ok, 5)
	if err != nil {
		t.Fatal(err)
	}
	var hiN, hiOK int
	for i, c := range s.conf {
		if c >= 0.5 {
			hiN++
			if s.ok[i] {
				hiOK++
			}
		}
	}
	for _, b := range table {
		t.Logf("confidence [%.1f, %.1f): %3d detections, mean stated %.2f, correct %.2f", b.Lo, b.Hi, b.N, b.MeanConfidence, b.Accuracy)
	}
	t.Logf("ECE %.3f; confident detections correct %d/%d", ece, hiOK, hiN)
	if hiN == 0 || float64(hiOK) < 0.95*float64(hiN) {
		t.Errorf("confident detections correct %d/%d, want ≥ 95 %%", hiOK, hiN)
	}
	if ece > 0.1 {
		t.Errorf("expected calibration error %.3f > 0.1", ece)
	}
}
