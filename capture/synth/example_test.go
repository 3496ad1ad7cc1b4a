package synth_test

import (
	"fmt"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/synth"
)

// Render the first frame of the demo scene and look at its truth.
func Example() {
	sc, err := synth.Lookup("weave")
	if err != nil {
		panic(err)
	}
	r, err := synth.New(sc)
	if err != nil {
		panic(err)
	}
	defer r.Close()
	frame := gocv.NewMat()
	defer frame.Close()
	info, err := r.Read(&frame)
	if err != nil {
		panic(err)
	}
	t := r.Truth()
	fmt.Println(r.Info().Name, info.Size, frame.Type() == gocv.MatTypeCV8UC3)
	fmt.Printf("visible %v, width %.0f px at row %.0f, line %.2f m right at %.0f m\n",
		t.Visible, t.WidthPx, r.Header().RefRow, t.OffsetM, r.Header().LookaheadM)
	// Output:
	// synthetic:weave (640,480) true
	// visible true, width 41 px at row 384, line 0.17 m right at 1 m
}
