package cnn_test

import (
	"fmt"
	"os"

	"github.com/hewline/hewline/vision"
	"github.com/hewline/hewline/vision/cnn"
	"gocv.io/x/gocv"
)

// Load the shipped model and measure a rendered frame with a yellow stripe
// right of centre.
func ExampleNewDetector() {
	b, err := os.ReadFile("shipped/stripe-rowanchor.onnx")
	if err != nil {
		fmt.Println(err)
		return
	}
	d, err := cnn.NewDetector(b, cnn.Config{})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer d.Close()

	sc := cnn.Scene{W: 640, H: 480, Floor: [3]float64{110, 115, 118}, Tape: [3]float64{20, 200, 235},
		Present: true, X0: 420, Length: 1, WidthNear: 50, WidthFar: 30, Gain: 1}
	img := gocv.NewMat()
	defer img.Close()
	if err := sc.Render(&img); err != nil {
		fmt.Println(err)
		return
	}
	det := d.Detect(img, vision.Hint{})
	fmt.Println(det.Method, det.Found)
	fmt.Println("stripe right of centre:", det.OffsetPx > 0)
	fmt.Println("offset within 10 px of 100:", det.OffsetPx > 90 && det.OffsetPx < 110)
	// Output:
	// cnn true
	// stripe right of centre: true
	// offset within 10 px of 100: true
}
