package vision

import (
	"math/rand"
	"sort"
	"testing"
)

// nearMedian must return the exact median whatever its guess: checked
// against sorting (Go's sort.Float64s) on series of samples that drift
// slowly (the guess holds), jump (it misses), carry ties and outliers, and
// change length.
func TestNearMedianExact(t *testing.T) {
	r := rand.New(rand.NewSource(7))
	tests := map[string]func(i, j int, level float64) float64{
		"drift":    func(i, j int, level float64) float64 { return level + r.NormFloat64() },
		"jumps":    func(i, j int, level float64) float64 { return level*float64(1+i%3*40) + r.NormFloat64() },
		"ties":     func(i, j int, level float64) float64 { return float64(r.Intn(3)) },
		"outliers": func(i, j int, level float64) float64 { return level + 200*float64(r.Intn(2)) + r.Float64() },
		"constant": func(i, j int, level float64) float64 { return 5 },
	}
	for name, gen := range tests {
		t.Run(name, func(t *testing.T) {
			var g nearMedian
			level := 100.0
			for i := 0; i < 400; i++ {
				if i%50 == 0 {
					g.forget()
				}
				level += 0.3 * r.NormFloat64()
				n := 1 + r.Intn(330)
				s := make([]float64, n)
				for j := range s {
					s[j] = gen(i, j, level)
				}
				ref := append([]float64(nil), s...)
				sort.Float64s(ref)
				if got := g.median(s); got != ref[n/2] {
					t.Fatalf("sample %d (n %d): median %v, want %v", i, n, got, ref[n/2])
				}
			}
		})
	}
}
