package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/capture/truth"
)

// soxMax measures the maximum absolute amplitude (0..1) of a stretch of a
// WAV file with sox (Debian's sox package), an outside measurement tool.
func soxMax(t *testing.T, path string, from, dur float64) float64 {
	t.Helper()
	out, err := exec.Command("sox", path, "-n", "trim", strconv.FormatFloat(from, 'f', 4, 64), strconv.FormatFloat(dur, 'f', 4, 64), "stat").CombinedOutput()
	if err != nil {
		t.Fatalf("sox: %v: %s", err, out)
	}
	for _, l := range strings.Split(string(out), "\n") {
		if strings.HasPrefix(l, "Maximum amplitude:") {
			v, err := strconv.ParseFloat(strings.TrimSpace(strings.TrimPrefix(l, "Maximum amplitude:")), 64)
			if err != nil {
				t.Fatal(err)
			}
			return v
		}
	}
	t.Fatalf("sox printed no maximum amplitude: %s", out)
	return 0
}

// TestGapAlarmInWAV replays the line-gap scene into a WAV sink and checks,
// with sox, that the alarm sounds within the configured fail-safe time of
// each loss of the line. The guidance cue peaks at −12 dBFS (0.25) and the
// alarm at −1 dBFS (0.89), so a stretch peaking above 0.5 holds the alarm.
func TestGapAlarmInWAV(t *testing.T) {
	if testing.Short() {
		t.Skip("renders and replays a whole clip")
	}
	if _, err := exec.LookPath("sox"); err != nil {
		t.Skip("sox not installed: scripts/setup.sh installs it; this check needs it")
	}
	dir := t.TempDir()
	sc, err := synth.Lookup("gap")
	if err != nil {
		t.Fatal(err)
	}
	clip, tp, wav := filepath.Join(dir, "gap.avi"), filepath.Join(dir, "gap.truth.ndjson"), filepath.Join(dir, "gap.wav")
	if err := synth.WriteClip(sc, clip, tp); err != nil {
		t.Fatal(err)
	}
	for _, failSafe := range []string{"300ms", "500ms"} {
		t.Run(failSafe, func(t *testing.T) {
			if code, _, se := runCmd(t, "replay", "-failsafe", failSafe, "-wav", wav, "-out", dir, clip); code != 0 {
				t.Fatalf("replay exit %d: %s", code, se)
			}
			fs, _ := strconv.ParseFloat(strings.TrimSuffix(failSafe, "ms"), 64)
			fs /= 1000
			f, _ := os.Open(tp)
			_, frames, err := truth.Read(f)
			f.Close()
			if err != nil {
				t.Fatal(err)
			}
			frame := 1 / sc.FPS
			losses := 0
			for i := 1; i < len(frames); i++ {
				if !(frames[i-1].Visible && !frames[i].Visible) {
					continue
				}
				losses++
				loss := frames[i].T
				// Quiet (guidance only) in the second before the loss,
				// while the line was visible...
				if m := soxMax(t, wav, loss-1, 1-frame); m > 0.3 {
					t.Errorf("loss at %.3f s: peak %.2f in the second before it: alarm while the line was visible?", loss, m)
				}
				// ...and the alarm within the fail-safe time plus one
				// frame and one 20 ms audio buffer.
				if m := soxMax(t, wav, loss, fs+frame+0.02); m < 0.5 {
					t.Errorf("loss at %.3f s: peak %.2f within %.3f s: no alarm", loss, m, fs+frame+0.02)
				}
			}
			if losses == 0 {
				t.Fatal("the gap scene has no loss of the line")
			}
		})
	}
}
