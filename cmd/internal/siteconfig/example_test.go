package siteconfig_test

import (
	"fmt"

	"github.com/hewline/hewline/cmd/internal/siteconfig"
)

func ExampleParse() {
	_, err := siteconfig.Parse("aisle-c.yaml", []byte(`
alarm:
  fail_safe_after: 20ms
detector:
  tape_colour: purple
  tape_widht_mm: 50
`))
	fmt.Println(err)
	// Output:
	// aisle-c.yaml:3: alarm.fail_safe_after: 20ms is shorter than one frame interval (33.3ms at 30 fps, as camera.fps is not set): the alarm would sound between any two frames (want at least 33.3ms)
	// aisle-c.yaml:5: detector.tape_colour: "purple" is not a tape colour (want yellow, orange, red, green, blue, bgr:B,G,R, or none for white, grey and black tape)
	// aisle-c.yaml:6: detector.tape_widht_mm: unknown field (did you mean "tape_width_mm"?) (known in detector: roi, polarity, tape_colour, tape_width_mm, ref_row, min_contrast, min_snr, sauvola_k, sauvola_r, work_width, iterations, min_span)
}
