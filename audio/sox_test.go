package audio

import (
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/hewline/hewline/audio/audiotest"
	"github.com/rs/zerolog"
)

// Cross-checks with sox (Debian's sox 14.4, an outside measurement tool):
// "stats" for per-channel RMS levels, "stat" for its zero-crossing "rough
// frequency", "sinc" as an independent band-pass filter, "trim" for
// windows, "soxi" for the file header.

// needSox returns sox's path or skips loudly; on CI (CI set) a missing sox
// fails the test, since the setup script installs it.
func needSox(t *testing.T) {
	t.Helper()
	for _, tool := range []string{"sox", "soxi"} {
		if _, err := exec.LookPath(tool); err != nil {
			if os.Getenv("CI") != "" {
				t.Fatalf("%s is missing on CI; scripts/setup.sh must install Debian's sox", tool)
			}
			t.Skipf("!!! SKIPPED: %s IS NOT INSTALLED; the outside check with sox did not run (apt-get install sox) !!!", tool)
		}
	}
}

func runSox(t *testing.T, tool string, args ...string) string {
	t.Helper()
	out, err := exec.Command(tool, args...).CombinedOutput()
	if err != nil {
		t.Fatalf("%s %s: %v\n%s", tool, strings.Join(args, " "), err, out)
	}
	return string(out)
}

// soxField finds "label ... value" in sox output and returns the n-th
// number after the label (0-based).
func soxField(t *testing.T, out, label string, n int) float64 {
	t.Helper()
	for _, line := range strings.Split(out, "\n") {
		if rest, ok := strings.CutPrefix(line, label); ok {
			f := strings.Fields(strings.TrimLeft(rest, ":"))
			if n < len(f) {
				v, err := strconv.ParseFloat(f[n], 64)
				if err != nil {
					t.Fatalf("sox %q: %v", label, err)
				}
				return v
			}
		}
	}
	t.Fatalf("sox output lacks %q:\n%s", label, out)
	return 0
}

// writeCues renders steps of cues into a WAV file in replay mode: step i
// starts at times[i].
func writeCues(t *testing.T, times []time.Duration, cues []Cue, end time.Duration, m Mapping) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "cue.wav")
	w, err := NewWAVSink(path, testRate)
	if err != nil {
		t.Fatal(err)
	}
	quiet := zerolog.Nop() // an audit-only player logs that nobody hears the alarm
	p, err := NewPlayer(newTestSynth(t, m, DefaultAlarm()), PlayerConfig{Log: &quiet}, Channel{Name: path, Sink: w})
	if err != nil {
		t.Fatal(err)
	}
	for i := range times {
		if err := p.Update(times[i], cues[i]); err != nil {
			t.Fatal(err)
		}
	}
	if err := p.Advance(end); err != nil {
		t.Fatal(err)
	}
	if err := p.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestSoxCrossCheckTone(t *testing.T) {
	needSox(t)
	m := DefaultMapping()
	for name, off := range map[string]float64{"left 0.3": -0.3, "right 0.6": 0.6, "right 1": 1} {
		t.Run(name, func(t *testing.T) {
			c := Cue{Guide: true, Offset: off}
			path := writeCues(t, []time.Duration{0}, []Cue{c}, 1100*time.Millisecond, m)
			wantL, wantR, wantHz := documented(m, c)

			stats := runSox(t, "sox", path, "-n", "trim", "0.1", "1", "stats")
			soxL := soxField(t, stats, "RMS lev dB", 1)
			soxR := soxField(t, stats, "RMS lev dB", 2)
			wav, err := audiotest.ReadWAV(path)
			if err != nil {
				t.Fatal(err)
			}
			l, r := wav.Data[0][testRate/10:], wav.Data[1][testRate/10:]
			fftDiff := peakDBOfSine(l) - peakDBOfSine(r)
			if d := (soxL - soxR) - fftDiff; math.Abs(d) > levelTol {
				t.Errorf("L−R: sox %.2f dB, ours %.2f dB", soxL-soxR, fftDiff)
			}
			if d := (soxL - soxR) - (wantL - wantR); math.Abs(d) > levelTol {
				t.Errorf("L−R: sox %.2f dB, mapping %.2f dB", soxL-soxR, wantL-wantR)
			}
			// The louder channel carries the pitch most cleanly.
			ch, x := "1", l
			if off > 0 {
				ch, x = "2", r
			}
			soxHz := soxField(t, runSox(t, "sox", path, "-n", "remix", ch, "trim", "0.1", "1", "stat"), "Rough   frequency", 0)
			fftHz := peakHz(x, testRate)
			if math.Abs(soxHz/fftHz-1) > pitchTol || math.Abs(soxHz/wantHz-1) > pitchTol {
				t.Errorf("pitch: sox %.0f Hz, FFT %.2f Hz, mapping %.2f Hz", soxHz, fftHz, wantHz)
			}
		})
	}
}

func TestSoxCrossCheckAlarmBand(t *testing.T) {
	needSox(t)
	a := DefaultAlarm()
	_, period := a.Onsets()
	path := writeCues(t, []time.Duration{0}, []Cue{{Alarm: true}}, period, DefaultMapping())
	all := soxField(t, runSox(t, "sox", path, "-n", "remix", "1", "stat"), "RMS     amplitude", 0)
	band := soxField(t, runSox(t, "sox", path, "-n", "remix", "1", "sinc", "-t", "5", "500-2500", "stat"), "RMS     amplitude", 0)
	soxShare := band * band / (all * all)
	wav, err := audiotest.ReadWAV(path)
	if err != nil {
		t.Fatal(err)
	}
	fftShare := bandEnergy(wav.Data[0], testRate, 500, 2500)
	// ISO 7731's 500–2500 Hz band (REFERENCES.md).
	if soxShare < 0.95 {
		t.Errorf("sox: %.1f %% of the alarm's energy in 500–2500 Hz, want ≥ 95 %%", 100*soxShare)
	}
	if math.Abs(soxShare-fftShare) > 0.02 {
		t.Errorf("band share: sox %.3f, FFT %.3f", soxShare, fftShare)
	}
}

// soxRMS is sox's RMS level in dB of channel 1 over [from, to).
func soxRMS(t *testing.T, path string, from, to float64) float64 {
	out := runSox(t, "sox", path, "-n", "remix", "1", "trim", strconv.FormatFloat(from, 'f', 4, 64),
		"="+strconv.FormatFloat(to, 'f', 4, 64), "stats")
	return soxField(t, out, "RMS lev dB", 0)
}

// Timing through sox's windows: an interval said to be on must be loud all
// through once 4 ms are cut at either end (the ramps reach ±2.5 ms for
// guidance, ±10 ms for the alarm's rise, cut accordingly); an interval said
// to be off must be silent. Edges off by more than the cut fail one window.
func TestSoxCrossCheckPulseTiming(t *testing.T) {
	needSox(t)
	m := DefaultMapping()
	m.Mode = ModePulse
	c := Cue{Guide: true, Offset: 1} // 8 pulses per second: 62.5 ms on, 62.5 ms off
	path := writeCues(t, []time.Duration{0}, []Cue{c}, time.Second, m)
	const cut = 0.004
	period := 1 / m.MaxPulseHz
	on := m.PulseDuty * period
	level, _, _, _ := m.Expected(c)
	for k := 0; k < 7; k++ {
		rise := float64(k)*period + m.Ramp.Seconds()/2
		fall := rise + on
		if got := soxRMS(t, path, rise+cut, fall-cut); math.Abs(got-(level-3.01)) > 1 {
			t.Errorf("pulse %d on [%.4f, %.4f] s: sox RMS %.1f dB, want %.1f", k, rise+cut, fall-cut, got, level-3.01)
		}
		if got := soxRMS(t, path, fall+cut, rise+period-cut); got > -80 {
			t.Errorf("pulse %d off [%.4f, %.4f] s: sox RMS %.1f dB, want silence", k, fall+cut, rise+period-cut, got)
		}
	}
}

func TestSoxCrossCheckAlarmOnset(t *testing.T) {
	needSox(t)
	a := DefaultAlarm()
	raise := 500 * time.Millisecond
	path := writeCues(t, []time.Duration{0, raise}, []Cue{{}, {Alarm: true}}, 2*time.Second, DefaultMapping())
	onsets, _ := a.Onsets()
	cut := (a.Rise/2 + 4*time.Millisecond).Seconds()
	if got := soxRMS(t, path, 0, (raise+onsets[0]).Seconds()-cut); got > -80 {
		t.Errorf("before the alarm: sox RMS %.1f dB, want silence", got)
	}
	for i, o := range onsets[:5] {
		from := (raise + o).Seconds() + cut
		to := (raise + o + a.Pulse).Seconds() - cut
		if got := soxRMS(t, path, from, to); got < a.LevelDBFS-12 {
			t.Errorf("alarm pulse %d [%.4f, %.4f] s: sox RMS %.1f dB, want loud", i, from, to, got)
		}
		if i+1 < len(onsets) {
			gapFrom, gapTo := to+2*cut, (raise+onsets[i+1]).Seconds()-cut
			if got := soxRMS(t, path, gapFrom, gapTo); got > -80 {
				t.Errorf("after alarm pulse %d [%.4f, %.4f] s: sox RMS %.1f dB, want silence", i, gapFrom, gapTo, got)
			}
		}
	}
}

func TestSoxReadsWAVHeader(t *testing.T) {
	needSox(t)
	path := filepath.Join(t.TempDir(), "h.wav")
	w, err := NewWAVSink(path, 44100)
	if err != nil {
		t.Fatal(err)
	}
	buf := make([]float32, 2*441)
	for i := 0; i < 10; i++ {
		if err := w.Write(buf); err != nil {
			t.Fatal(err)
		}
	}
	// Not closed yet (as after a crash): the header already tells the truth.
	check := func(when string, frames int) {
		for flag, want := range map[string]string{"-r": "44100", "-c": "2", "-b": "16", "-s": strconv.Itoa(frames), "-e": "Signed Integer PCM"} {
			if got := strings.TrimSpace(runSox(t, "soxi", flag, path)); got != want {
				t.Errorf("%s: soxi %s = %q, want %q", when, flag, got, want)
			}
		}
	}
	check("before Close", 4410)
	if err := w.Write(buf[:2*41]); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	check("after Close", 4451)
}
