package audio

import (
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/hewline/hewline/audio/audiotest"
)

func TestWAVSink(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "a.wav")
	w, err := NewWAVSink(path, testRate)
	if err != nil {
		t.Fatal(err)
	}
	// Full scale and beyond clip to the 16-bit limits.
	if err := w.Write([]float32{0, 0.5, -0.5, 1, 2, -2}); err != nil {
		t.Fatal(err)
	}
	if err := w.Write([]float32{1}); err == nil {
		t.Error("half a stereo frame accepted")
	}
	// A crash before Close loses nothing already written.
	mid, err := audiotest.ReadWAV(path)
	if err != nil || len(mid.Data[0]) != 3 {
		t.Fatalf("before Close: %v, %+v", err, mid)
	}
	w.Halt()
	if err := w.Write([]float32{0.1, 0.1}); err != nil || w.Frames() != 3 {
		t.Errorf("after Halt: err %v, %d frames; want the write discarded", err, w.Frames())
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := w.Write([]float32{0, 0}); err == nil {
		t.Error("write after Close accepted")
	}
	got, err := audiotest.ReadWAV(path)
	if err != nil {
		t.Fatal(err)
	}
	wantL := []float64{0, -16384.0 / 32768, 32767.0 / 32768}
	wantR := []float64{16384.0 / 32768, 1 - 1.0/32768, -1}
	for i := range wantL {
		if got.Data[0][i] != wantL[i] || got.Data[1][i] != wantR[i] {
			t.Errorf("frame %d = %g, %g; want %g, %g", i, got.Data[0][i], got.Data[1][i], wantL[i], wantR[i])
		}
	}
	if got.Rate != testRate || got.Channels != 2 {
		t.Errorf("rate %d channels %d", got.Rate, got.Channels)
	}
	if _, err := NewWAVSink(filepath.Join(dir, "no", "such", "dir.wav"), testRate); err == nil {
		t.Error("WAV in a missing directory opened")
	}
}

func TestReadWAVRejectsDamage(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.wav")
	w, err := NewWAVSink(good, testRate)
	if err != nil {
		t.Fatal(err)
	}
	w.Write(make([]float32, 200))
	w.Close()
	b, _ := os.ReadFile(good)
	cases := map[string][]byte{
		"truncated":  b[:len(b)-10],
		"not riff":   append([]byte("RIFX"), b[4:]...),
		"too short":  b[:20],
		"empty file": {},
	}
	for name, data := range cases {
		p := filepath.Join(dir, name+".wav")
		os.WriteFile(p, data, 0o644)
		if _, err := audiotest.ReadWAV(p); err == nil {
			t.Errorf("%s: ReadWAV accepted it", name)
		}
	}
}

func TestOnsetFindsTheAlarm(t *testing.T) {
	// audiotest.Onset, as the pipeline's line-gap replay test uses it: the
	// alarm raised at 0.7 s is found within a 10 ms window of its first
	// pulse.
	path := writeCues(t, []time.Duration{0, 700 * time.Millisecond},
		[]Cue{{Guide: true, Offset: 0.5}, {Guide: true, Offset: 0.5, Alarm: true}}, 2*time.Second, DefaultMapping())
	wav, err := audiotest.ReadWAV(path)
	if err != nil {
		t.Fatal(err)
	}
	// The guidance cue peaks at −21 dBFS (RMS −24); the alarm reaches −1.
	at, ok := audiotest.Onset(wav.Data[0], wav.Rate, 10*time.Millisecond, -12)
	if !ok || at < 700*time.Millisecond || at > 720*time.Millisecond {
		t.Errorf("onset %v (found %v), want within 20 ms after 700ms", at, ok)
	}
	if _, ok := audiotest.Onset(wav.Data[0][:wav.Rate/2], wav.Rate, 10*time.Millisecond, -12); ok {
		t.Error("onset found in the guidance-only part")
	}
}
