package calib_test

import (
	"fmt"
	"math"

	"github.com/hewline/hewline/calib"
)

// A camera 0.9 m above the floor, pitched 40° down, on an invented cart:
// build the floor mapping from its pose and measure a stripe.
func Example() {
	lens := calib.Lens{Fx: 600, Fy: 600, Cx: 320, Cy: 240}
	fl, err := calib.FloorFromPose(lens, 900, 40)
	if err != nil {
		fmt.Println(err)
		return
	}
	f := &calib.File{Format: calib.FormatV1, ImageSize: [2]int{640, 480}, Lens: &lens, Floor: &fl}
	if err := f.Validate(); err != nil {
		fmt.Println(err)
		return
	}
	m, _ := calib.NewMapper(f)
	// The image centre looks at the floor h/tan(pitch) ahead.
	q, _ := m.ToFloor(calib.Pt{X: 320, Y: 240})
	fmt.Printf("image centre is %.0f mm ahead, %.0f mm right\n", q.X, math.Round(q.Y)+0) // +0 turns -0 into 0

	// A stripe 100 mm right of the axis, straight ahead: its pixels.
	var pts []calib.Pt
	for X := 600.0; X <= 2000; X += 100 {
		p, _ := m.ToImage(calib.Pt{X: X, Y: 100})
		pts = append(pts, p)
	}
	ms, _ := m.Measure(pts, 400, 0, 1000)
	fmt.Printf("offset %.1f mm, heading %.1f°, ok %v\n", ms.OffsetMM, ms.HeadingDeg, ms.OK)
	// Output:
	// image centre is 1073 mm ahead, 0 mm right
	// offset 100.0 mm, heading 0.0°, ok true
}
