package cnn

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestGradients checks the analytic gradients of every parameter tensor
// against central finite differences, (L(w+h) − L(w−h)) / 2h, the
// textbook numerical derivative. The network runs in float32, so h is
// 1e-2 and a gradient passes when |numeric − analytic| ≤ 2e-3 + 5 % of
// its size; a ReLU or max-pool kink crossed by ±h can spoil a single
// entry, so up to 2 % of the checked entries may miss (none do in
// practice with these seeds).
func TestGradients(t *testing.T) {
	tests := map[string]Arch{
		"one block":    {InW: 8, InH: 8, Conv: []int{3}, Hidden: 5, Rows: 4, Cells: 4},
		"three blocks": {InW: 16, InH: 8, Conv: []int{4, 3, 2}, Hidden: 6, Rows: 3, Cells: 5},
	}
	for name, a := range tests {
		t.Run(name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(1, 2))
			m, err := NewModel(a, rng)
			if err != nil {
				t.Fatal(err)
			}
			// Non-zero biases so that the bias gradients are exercised
			// away from the ReLU kink.
			for _, p := range m.params() {
				for i := range p.Data {
					p.Data[i] += float32(rng.NormFloat64() * 0.1)
				}
			}
			in := make([]float32, a.InW*a.InH)
			for i := range in {
				in[i] = float32(rng.NormFloat64())
			}
			labels := make([]uint8, a.Rows)
			for i := range labels {
				labels[i] = uint8(rng.IntN(a.Classes()))
			}
			wk := newWork(a)
			g := newGrads(m)
			m.forward(wk, in)
			m.backward(wk, labels, g)
			lossAt := func() float64 {
				m.forward(wk, in)
				var l float64
				k := a.Classes()
				for r := 0; r < a.Rows; r++ {
					l -= math.Log(float64(wk.out[r*k+int(labels[r])]))
				}
				return l / float64(a.Rows)
			}
			const h = 1e-3
			checked, missed := 0, 0
			for pi, p := range m.params() {
				for i := range p.Data {
					old := p.Data[i]
					p.Data[i] = old + h
					lp := lossAt()
					p.Data[i] = old - h
					lm := lossAt()
					p.Data[i] = old
					num := (lp - lm) / (2 * h)
					ana := float64(g[pi][i])
					checked++
					if math.Abs(num-ana) > 2e-3+0.05*math.Abs(ana) {
						missed++
						if missed < 5 {
							t.Logf("%s[%d]: numeric %.6f, analytic %.6f", p.Name, i, num, ana)
						}
					}
				}
			}
			if missed*50 > checked {
				t.Errorf("%d of %d gradient entries differ from finite differences", missed, checked)
			}
			t.Logf("%d entries checked, %d outside tolerance", checked, missed)
		})
	}
}

// TestSoftmaxRows checks the softmax against values worked by hand:
// softmax(0, ln 2, ln 3) = (1/6, 2/6, 3/6), and that huge logits do not
// overflow.
func TestSoftmaxRows(t *testing.T) {
	z := []float32{0, float32(math.Ln2), float32(math.Log(3)), 1000, 1000, 0}
	softmaxRows(z, 3)
	want := []float64{1.0 / 6, 2.0 / 6, 3.0 / 6, 0.5, 0.5, 0}
	for i, w := range want {
		if math.Abs(float64(z[i])-w) > 1e-6 {
			t.Errorf("p[%d] = %v, want %v", i, z[i], w)
		}
	}
}
