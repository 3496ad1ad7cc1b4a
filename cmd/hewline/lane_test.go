package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/guidance/tracklog"
)

// TestReplayFollowLane renders 45 frames of the lane-straight scene and
// replays them with -follow lane and -truth: the log is in lane mode, its
// records carry both boundaries and the lane width, the centre is tracked,
// and the score against the truth (the renderer's lane centre) is printed.
// The lane width 337.2 px at the reference row is worked by hand in
// capture/synth's TestLaneTruthByHand (pinhole projection).
// Stripe mode on the same clip is not refused; lane mode with the stripe
// CNN fallback is.
func TestReplayFollowLane(t *testing.T) {
	sc, err := synth.Lookup("lane-straight")
	if err != nil {
		t.Fatal(err)
	}
	sc.Frames = 45
	dir := t.TempDir()
	clip := filepath.Join(dir, "lane.avi")
	tp := filepath.Join(dir, "lane.truth.ndjson")
	if err := synth.WriteClip(sc, clip, tp); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out")
	code, stdout, stderr := runCmd(t, "replay", "-follow", "lane", "-truth", tp, "-out", out, clip)
	if code != 0 {
		t.Fatalf("replay -follow lane: exit %d: %s %s", code, stdout, stderr)
	}
	// The tracker needs its reacquire time (0.2 s, 6 frames) before it
	// claims tracking: 39 of 45 frames.
	if !strings.Contains(stdout, "false tracks 0,") || !regexp.MustCompile(`recall (0\.8[5-9]|0\.9|1\.0)`).MatchString(stdout) {
		t.Errorf("lane centre not tracked: %s", stdout)
	}
	f, err := os.Open(filepath.Join(out, "lane.track.ndjson"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	l, err := tracklog.Read(f)
	if err != nil {
		t.Fatal(err)
	}
	if l.Header.Follow != "lane" {
		t.Errorf("header follow %q", l.Header.Follow)
	}
	// lane width at the reference row: 337.2 px by hand for a centred
	// cart (capture/synth TestLaneTruthByHand); the cart weaves ±10 cm
	both := 0
	for _, r := range l.Records {
		if r.Method != "lane" {
			t.Fatalf("frame %d: method %q", r.Frame, r.Method)
		}
		if len(r.LeftPoints) >= 8 && len(r.RightPoints) >= 8 && r.LanePx > 320 && r.LanePx < 355 {
			both++
		}
	}
	if both < len(l.Records)-1 {
		t.Errorf("%d of %d records with both boundaries and a lane width near 337 px", both, len(l.Records))
	}
	if code, _, se := runCmd(t, "replay", "-follow", "lane", "-cnn", "-out", out, clip); code != 2 || !strings.Contains(se, "stripe mode only") {
		t.Errorf("lane mode with the CNN: exit %d, %s", code, se)
	}
	if code, _, se := runCmd(t, "replay", "-follow", "zigzag", "-out", out, clip); code != 2 {
		t.Errorf("-follow zigzag: exit %d, %s", code, se)
	}
	// A configured lane width: the right one (337 px, as above) tracks the
	// centre; one 40 % too wide makes the two lines no lane, so nothing is
	// tracked and nothing falsely; millimetres need a calibration.
	if code, so, se := runCmd(t, "replay", "-follow", "lane", "-lane-width-px", "337", "-truth", tp, "-out", out, clip); code != 0 ||
		!strings.Contains(so, "false tracks 0,") || !regexp.MustCompile(`recall (0\.8[5-9]|0\.9|1\.0)`).MatchString(so) {
		t.Errorf("-lane-width-px 337: exit %d: %s %s", code, so, se)
	}
	if code, so, se := runCmd(t, "replay", "-follow", "lane", "-lane-width-px", "472", "-truth", tp, "-out", out, clip); code != 0 ||
		!strings.Contains(so, "recall 0.000") || !strings.Contains(so, "false tracks 0,") {
		t.Errorf("-lane-width-px 472 (40 %% too wide): exit %d: %s %s", code, so, se)
	}
	if code, _, se := runCmd(t, "replay", "-follow", "lane", "-lane-width-mm", "900", "-out", out, clip); code != 2 || !strings.Contains(se, "needs a calibration") {
		t.Errorf("-lane-width-mm without -calib: exit %d, %s", code, se)
	}
}
