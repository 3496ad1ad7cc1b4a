package haptic_test

import (
	"fmt"
	"time"

	"github.com/hewline/hewline/guidance/haptic"
	"github.com/hewline/hewline/guidance/haptic/haptictest"
)

// A cue 60 % to the right pulses the right motor; the alarm drives both;
// Halt silences them at once.
func Example() {
	now := time.Unix(0, 0)
	clock := func() time.Time { return now }
	fake := &haptictest.Fake{Now: clock}
	v := haptic.NewVibrator(fake, haptic.NewMapper(), clock)

	_ = v.Cue(haptic.Cue{Offset: haptic.Normalize(192, 320), Guide: true})
	l, r := fake.Levels()
	fmt.Println("guide right:", l, r)

	_ = v.Cue(haptic.Cue{Alarm: true})
	l, r = fake.Levels()
	fmt.Println("alarm:", l, r)

	_ = v.Halt()
	l, r = fake.Levels()
	fmt.Println("halted:", l, r, fake.Halted())
	// Output:
	// guide right: 0 161
	// alarm: 255 255
	// halted: 0 0 true
}
