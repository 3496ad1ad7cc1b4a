package vision

import (
	"math"
	"testing"
)

// TestRepeatedMedian checks Siegel's repeated-median line on a set worked
// by hand: the points (0, 10), (1, 12), (2, 14), (3, 16) lie on
// w = 10 + 2t and (4, 30) is off it. The median slopes from each point
// to the others are 2, 2, 2, 2 and, from (4, 30), the upper middle of
// 5, 6, 8, 14, that is 8; their median is 2, and the median of the
// intercepts w − 2t (10, 10, 10, 10, 22) is 10. Least squares over the
// five points gives slope 4.4 and intercept 7.6 instead.
func TestRepeatedMedian(t *testing.T) {
	c := &Classical{}
	q, ok := c.repeatedMedian([]float64{0, 1, 2, 3, 4}, []float64{10, 12, 14, 16, 30})
	if !ok {
		t.Fatal("no line")
	}
	if math.Abs(q.a-10) > 1e-12 || math.Abs(q.b-2) > 1e-12 {
		t.Errorf("line w = %.4f + %.4f·t, want 10 + 2·t", q.a, q.b)
	}
	if _, ok := c.repeatedMedian([]float64{1, 1, 1}, []float64{3, 4, 5}); ok {
		t.Error("a line through points of one t")
	}
}

// TestWidthFitRobust fits the width profile of a line whose crossings
// widen linearly towards the camera (perspective on a flat floor), with
// a stretch of them widened or narrowed, as a branch merging with the
// stripe or worn edges do. Where the stretch is under a quarter of the
// crossings the profile must follow the line's own crossings, which
// plain least squares does not (the check fails with widthFit reduced to
// widthLSQ); where the widths disagree more widely, least squares stands.
func TestWidthFitRobust(t *testing.T) {
	l := widthLineLayout
	trueW := widthLineTrue
	tests := map[string]struct {
		alter     func(k int) float64 // width factor of band k's crossing
		robust    bool                // the profile is the true one (else least squares')
		minErrLSQ float64             // least squares is at least this far off at the bottom
	}{
		"clean line":                    {alter: widthStretch(0, 0, 1), robust: true},
		"merged branch near the camera": {alter: widthStretch(0, 14, 1.45), robust: true, minErrLSQ: 2},
		"worn stretch in the middle":    {alter: widthStretch(20, 34, 0.6), robust: true, minErrLSQ: 0.5},
		"widths disagree over a third":  {alter: widthStretch(0, 22, 1.45), robust: false},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			c, r := widthLine(tc.alter)
			y0, sc := 240.0, 240.0
			wc, n := c.widthFit(r, l, y0, sc, widthAll)
			ls, nls := c.widthLSQ(r, l, y0, sc, widthAll, curve{})
			for _, k := range []int{0, 30, 60} {
				y := l.centre(k)
				want := trueW(k)
				if !tc.robust {
					want = ls.x(y)
				}
				if math.Abs(wc.x(y)-want) > 1e-6 {
					t.Errorf("band %d: profile %.3f px, want %.3f (%d of %d crossings used)", k, wc.x(y), want, n, nls)
				}
			}
			if e := math.Abs(ls.x(l.centre(0)) - trueW(0)); e < tc.minErrLSQ {
				t.Errorf("least squares alone is only %.2f px off at the bottom: the case does not test the robust fit", e)
			}
		})
	}
}

// BenchmarkWidthFitRobust is widthFit's cost on a line of 62 crossings
// whose 14 nearest are merged with a neighbour (the repeated-median
// path), and BenchmarkWidthFitClean on the same line without them (the
// least-squares line alone).
func BenchmarkWidthFitRobust(b *testing.B) { benchWidthFit(b, 1.45) }
func BenchmarkWidthFitClean(b *testing.B)  { benchWidthFit(b, 1) }

func benchWidthFit(b *testing.B, merged float64) {
	c, r := widthLine(widthStretch(0, 14, merged))
	l := widthLineLayout
	c.widthFit(r, l, 240, 240, widthAll) // grow the scratch memory
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		c.widthFit(r, l, 240, 240, widthAll)
	}
}

// widthLineLayout is the band layout of widthLine: 80 bands of 3 rows
// over a 320×240 region.
var widthLineLayout = bandLayout{x0: 0, x1: 320, y0: 0, y1: 240, step: 3, n: 80}

// widthLineTrue is widthLine's true width at band k: 24 px at the
// bottom, 0.2 px less per band.
func widthLineTrue(k int) float64 { return 24 - 0.2*float64(k) }

// widthLine is a detector holding a line of 62 crossings, one in each of
// the nearest bands of widthLineLayout, whose widths are widthLineTrue
// times alter(k), and the fit result with them as inliers.
func widthLine(alter func(k int) float64) (*Classical, *fitResult) {
	l := widthLineLayout
	c := &Classical{cfg: DefaultConfig(), hairline: 0.006 * 320}
	r := &fitResult{bands: make([]int, l.n)}
	for k := range r.bands {
		r.bands[k] = -1
		if k < 62 {
			r.bands[k] = len(c.cands)
			c.cands = append(c.cands, candidate{band: k, y: l.centre(k), x: 100, w: widthLineTrue(k) * alter(k), snr: 20})
		}
	}
	return c, r
}

// widthStretch is a width factor f over bands [from, to), 1 elsewhere.
func widthStretch(from, to int, f float64) func(int) float64 {
	return func(k int) float64 {
		if k >= from && k < to {
			return f
		}
		return 1
	}
}
