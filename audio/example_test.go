package audio_test

import (
	"fmt"
	"os"
	"path/filepath"
	"time"

	"github.com/hewline/hewline/audio"
	"github.com/rs/zerolog"
)

// The default mapping: quiet on target; off the line the side the cart
// must go gets louder, and the pitch rises one octave from the dead band
// to full error.
func ExampleMapping_Expected() {
	m := audio.DefaultMapping()
	for _, off := range []float64{-1, -0.3, 0, 0.04, 0.3, 1} {
		l, r, hz, _ := m.Expected(audio.Cue{Guide: true, Offset: off})
		fmt.Printf("offset %+.2f: left %6.1f dBFS, right %6.1f dBFS, %5.1f Hz\n", off, l, r, hz)
	}
	m.Mode = audio.ModePulse
	for _, off := range []float64{0.1, 0.5, 1} {
		_, _, hz, rate := m.Expected(audio.Cue{Guide: true, Offset: off})
		fmt.Printf("pulse mode, offset %+.2f: %.1f pulses/s at %.0f Hz\n", off, rate, hz)
	}
	// Output:
	// offset -1.00: left  -12.0 dBFS, right  -30.0 dBFS, 880.0 Hz
	// offset -0.30: left  -25.3 dBFS, right  -30.7 dBFS, 528.0 Hz
	// offset +0.00: left   -Inf dBFS, right   -Inf dBFS, 440.0 Hz
	// offset +0.04: left   -Inf dBFS, right   -Inf dBFS, 440.0 Hz
	// offset +0.30: left  -30.7 dBFS, right  -25.3 dBFS, 528.0 Hz
	// offset +1.00: left  -30.0 dBFS, right  -12.0 dBFS, 880.0 Hz
	// pulse mode, offset +0.10: 1.4 pulses/s at 440 Hz
	// pulse mode, offset +0.50: 4.3 pulses/s at 440 Hz
	// pulse mode, offset +1.00: 8.0 pulses/s at 440 Hz
}

// The fail-safe alarm's burst: ten pulses grouped 3+2+3+2.
func ExampleAlarmPattern_Onsets() {
	onsets, period := audio.DefaultAlarm().Onsets()
	for _, o := range onsets {
		fmt.Print(o.Milliseconds(), " ")
	}
	fmt.Println("ms; repeats every", period)
	// Output:
	// 10 260 510 960 1210 1660 1910 2160 2610 2860 ms; repeats every 4.01s
}

// Replay: each frame's cue is handed over with the frame's timestamp, so
// the WAV file follows replay time, not wall time.
func ExamplePlayer_Update() {
	dir, _ := os.MkdirTemp("", "hewline-audio")
	defer os.RemoveAll(dir)
	synth, err := audio.NewSynth(48000, audio.DefaultMapping(), audio.DefaultAlarm())
	if err != nil {
		fmt.Println(err)
		return
	}
	wav, err := audio.NewWAVSink(filepath.Join(dir, "shift.wav"), 48000)
	if err != nil {
		fmt.Println(err)
		return
	}
	quiet := zerolog.Nop()
	p, err := audio.NewPlayer(synth, audio.PlayerConfig{Log: &quiet},
		audio.Channel{Name: "shift.wav", Sink: wav})
	if err != nil {
		fmt.Println(err)
		return
	}
	for i := 0; i <= 90; i++ { // 3 s at 30 frames per second
		t := time.Duration(i) * time.Second / 30
		cue := audio.Cue{Guide: true, Offset: 0.2, Alarm: t >= 2*time.Second} // the line is lost at 2 s
		if err := p.Update(t, cue); err != nil {
			fmt.Println(err)
			return
		}
	}
	fmt.Println(wav.Frames(), "frames =", p.Rendered())
	if err := p.Close(); err != nil {
		fmt.Println(err)
	}
	// Output:
	// 144000 frames = 3s
}
