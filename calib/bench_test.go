package calib

import "testing"

// BenchmarkMeasure: one frame's centreline (40 points) undistorted, mapped
// to the floor and measured, with a distorting lens.
func BenchmarkMeasure(b *testing.B) {
	l := Lens{Fx: 532.8, Fy: 532.9, Cx: 342.5, Cy: 233.9, Dist: [5]float64{-0.281, 0.0291, 0.0012, -0.00014, 0.155}}
	fl, err := FloorFromPose(l, 900, 40)
	if err != nil {
		b.Fatal(err)
	}
	m, _ := newMapper(&l, &fl, 1000, 50)
	var pts []Pt
	for i := 0; i < 40; i++ {
		pts = append(pts, Pt{300 + float64(i), 470 - 6*float64(i)})
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := m.Measure(pts, 400, 12, 0); err != nil {
			b.Fatal(err)
		}
	}
}
