package cnn

import (
	"math"
	"math/rand/v2"
	"os"
	"testing"
)

// temperatureSamples draws n random inputs and labels each row from the
// model's own softmax at temperature t0: the labels are then distributed
// exactly as softmax(logits/t0) says, so the maximum-likelihood
// temperature is t0 (up to sampling error): each row reading is right
// with exactly the probability softmax(logits/t0) gives it.
func temperatureSamples(m *Model, n int, t0 float64, rng *rand.Rand) []Sample {
	a := m.Arch
	k := a.Classes()
	wk := newWork(a)
	var out []Sample
	for i := 0; i < n; i++ {
		in := randomInput(a, rng)
		z := m.logits(wk, in)
		s := Sample{In: in, Labels: make([]uint8, a.Rows)}
		for r := 0; r < a.Rows; r++ {
			row := z[r*k : (r+1)*k]
			mx := float64(row[argmax(row)])
			p := make([]float64, k)
			var sum float64
			for c, v := range row {
				p[c] = math.Exp((float64(v) - mx) / t0)
				sum += p[c]
			}
			u := rng.Float64() * sum
			c := 0
			for ; c < k-1 && u > p[c]; c++ {
				u -= p[c]
			}
			s.Labels[r] = uint8(c)
		}
		out = append(out, s)
	}
	return out
}

// TestFitTemperatureRecoversKnownTemperature checks FitTemperature on data
// whose true temperature is known: labels drawn from softmax(logits/t0)
// (temperature scaling as in Guo et al., ICML 2017: the fit is the
// maximum-likelihood t). The logits of a random model are scaled up first
// so that its softmax is peaked, as a trained network's is.
func TestFitTemperatureRecoversKnownTemperature(t *testing.T) {
	for name, t0 := range map[string]float64{"over-confident": 2.5, "calibrated": 1, "under-confident": 0.5} {
		t.Run(name, func(t *testing.T) {
			m := randomModel(t, testArchs["small"], 11)
			if err := m.ApplyTemperature(0.1); err != nil { // sharpen the random logits ×10
				t.Fatal(err)
			}
			delete(m.Notes, TemperatureNote)
			rng := rand.New(rand.NewPCG(12, 13))
			got, err := FitTemperature(m, temperatureSamples(m, 3000, t0, rng))
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("true temperature %.2f, fitted %.3f", t0, got)
			if math.Abs(math.Log(got/t0)) > 0.1 {
				t.Errorf("fitted temperature %.3f, want %.2f within 10 %%", got, t0)
			}
		})
	}
}

// TestApplyTemperature checks that folding 1/t into the last layer gives
// softmax(logits/t) in the Go pass, that OpenCV's DNN module (the outside
// reference implementation) still matches the Go pass within 1e-4 on the
// exported file, and that the temperature survives the ONNX round trip.
func TestApplyTemperature(t *testing.T) {
	a := DefaultArch()
	m := randomModel(t, a, 5)
	rng := rand.New(rand.NewPCG(6, 7))
	in := randomInput(a, rng)
	z := append([]float32(nil), m.logits(newWork(a), in)...)
	const temp = 1.7
	if err := m.ApplyTemperature(temp); err != nil {
		t.Fatal(err)
	}
	got := m.Predict(in)
	k := a.Classes()
	for r := 0; r < a.Rows; r++ {
		row := z[r*k : (r+1)*k]
		mx := float64(row[argmax(row)])
		var sum float64
		for _, v := range row {
			sum += math.Exp((float64(v) - mx) / temp)
		}
		for c, v := range row {
			want := math.Exp((float64(v)-mx)/temp) / sum
			if d := math.Abs(float64(got[r*k+c]) - want); d > 1e-5 {
				t.Fatalf("row %d class %d: %v, want softmax(z/%v) = %v", r, c, got[r*k+c], temp, want)
			}
		}
	}
	b, err := m.MarshalONNX()
	if err != nil {
		t.Fatal(err)
	}
	net, err := Load(b)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	out := make([]float32, a.Outputs())
	if err := net.Forward(in, out); err != nil {
		t.Fatal(err)
	}
	worst := 0.0
	for i := range got {
		worst = math.Max(worst, math.Abs(float64(out[i]-got[i])))
	}
	if worst > 1e-4 {
		t.Errorf("OpenCV and Go differ by %g after temperature scaling, want ≤ 1e-4", worst)
	}
	if tt := net.Model().Temperature(); math.Abs(tt-temp) > 1e-5 {
		t.Errorf("temperature after the round trip %v, want %v", tt, temp)
	}
	if err := m.ApplyTemperature(2); err != nil {
		t.Fatal(err)
	}
	if tt := m.Temperature(); math.Abs(tt-2*temp) > 1e-5 {
		t.Errorf("temperature applied twice %v, want %v", tt, 2*temp)
	}
	for _, bad := range []float64{0, -1, math.NaN(), math.Inf(1), 100} {
		if err := m.ApplyTemperature(bad); err == nil {
			t.Errorf("ApplyTemperature(%v) accepted", bad)
		}
	}
}

// TestRowReliability checks the row-reading rule against hand-made
// probabilities, and that the expected calibration error of the shipped
// model falls once its fitted temperature is applied, on rendered scenes
// it was not trained on (seed 7; it was trained with seed 1).
func TestRowReliability(t *testing.T) {
	a := Arch{Cells: 4}
	for name, c := range map[string]struct {
		p     []float32
		label int
		conf  float64
		right bool
	}{
		"absent, right":        {[]float32{0.1, 0, 0, 0.1, 0.8}, 4, 0.8, true},
		"absent, stripe there": {[]float32{0.1, 0, 0, 0.1, 0.8}, 0, 0.8, false},
		"cell, neighbour":      {[]float32{0.2, 0.5, 0.2, 0, 0.1}, 2, 0.9, true},
		"cell, two off":        {[]float32{0.2, 0.5, 0.2, 0, 0.1}, 3, 0.9, false},
		"cell, but absent":     {[]float32{0, 0, 0.3, 0.6, 0.1}, 4, 0.9, false},
	} {
		conf, right := rowReading(a, c.p, c.label)
		if math.Abs(conf-c.conf) > 1e-6 || right != c.right {
			t.Errorf("%s: %v %v, want %v %v", name, conf, right, c.conf, c.right)
		}
	}
	if testing.Short() {
		t.Skip("renders scenes")
	}
	b, err := os.ReadFile(shippedPath)
	if err != nil {
		t.Fatal(err)
	}
	m, err := UnmarshalONNX(b)
	if err != nil {
		t.Fatal(err)
	}
	// Undo the shipped model's own temperature: the test fits one anew.
	if ts := m.Temperature(); ts != 1 {
		if err := m.ApplyTemperature(1 / ts); err != nil {
			t.Fatal(err)
		}
	}
	data, err := SceneSamples(m.Arch, 1500, 7)
	if err != nil {
		t.Fatal(err)
	}
	fit, test := data[:1000], data[1000:]
	_, before, err := RowReliability(m, test, 10)
	if err != nil {
		t.Fatal(err)
	}
	temp, err := FitTemperature(m, fit)
	if err != nil {
		t.Fatal(err)
	}
	if err := m.ApplyTemperature(temp); err != nil {
		t.Fatal(err)
	}
	_, after, err := RowReliability(m, test, 10)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("fitted temperature %.3f on 1000 scenes; ECE on 500 others %.4f -> %.4f", temp, before, after)
	if after >= before {
		t.Errorf("ECE %.4f after temperature scaling, want below %.4f", after, before)
	}
}
