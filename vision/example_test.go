package vision_test

import (
	"fmt"
	"image"
	"image/color"

	"github.com/hewline/hewline/vision"
	"gocv.io/x/gocv"
)

// A white stripe painted on a grey floor, right of centre and leaning
// right towards the far end. By hand, at the reference row 384: the left
// edge is at 340 + 22·95/329 = 346.4, the right at 380 − 8·95/329 = 377.7,
// so the centre is 362 (offset 362 − 320 = 42) and the width about 31 px
// plus the one-pixel edge FillPoly adds; the centre moves 7 px right over
// 329 rows, a heading of atan(7/329) = 1.2°.
func ExampleClassical_Detect() {
	img := gocv.NewMatWithSizeFromScalar(gocv.NewScalar(100, 100, 100, 0), 480, 640, gocv.MatTypeCV8UC3)
	defer img.Close()
	stripe := gocv.NewPointsVectorFromPoints([][]image.Point{{
		{340, 479}, {380, 479}, {372, 150}, {362, 150},
	}})
	defer stripe.Close()
	gocv.FillPoly(&img, stripe, color.RGBA{R: 230, G: 230, B: 230})

	det, err := vision.NewClassical(vision.DefaultConfig())
	if err != nil {
		fmt.Println(err)
		return
	}
	defer det.Close()
	d := det.Detect(img, vision.Hint{})
	fmt.Printf("found %v, offset %.0f px, heading %.0f°, width %.0f px, confident %v\n",
		d.Found, d.OffsetPx, d.HeadingDeg, d.WidthPx, d.Confidence >= 0.5)
	// Output:
	// found true, offset 42 px, heading 1°, width 32 px, confident true
}
