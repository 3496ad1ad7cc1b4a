package main

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/hewline/hewline/guidance/score"
)

func TestDemoJobs(t *testing.T) {
	for name, tc := range map[string]struct {
		scen, size string
		want       []demoJob
		bad        bool
	}{
		"plain":           {scen: "weave,gap", want: []demoJob{{scene: "weave"}, {scene: "gap"}}},
		"sized item":      {scen: "dashed@320x240", want: []demoJob{{scene: "dashed", w: 320, h: 240}}},
		"-size for all":   {scen: "weave", size: "160x120,1280x720", want: []demoJob{{"weave", 160, 120}, {"weave", 1280, 720}}},
		"item wins":       {scen: "weave@320x240,gap", size: "160x120", want: []demoJob{{"weave", 320, 240}, {"gap", 160, 120}}},
		"duplicates once": {scen: "weave,weave@640x480,weave", size: "640x480", want: []demoJob{{"weave", 640, 480}}},
		"unknown scene":   {scen: "no-such-scene", bad: true},
		"bad size":        {scen: "weave@320", bad: true},
		"zero size":       {scen: "weave@0x0", bad: true},
		"huge size":       {scen: "weave@8000x6000", bad: true},
		"empty":           {scen: " , ", bad: true},
	} {
		t.Run(name, func(t *testing.T) {
			sizes, err := parseSizes(tc.size)
			if err != nil {
				t.Fatal(err)
			}
			got, err := demoJobs(tc.scen, sizes)
			if tc.bad {
				if err == nil {
					t.Errorf("accepted: %v", got)
				}
				return
			}
			if err != nil || !reflect.DeepEqual(got, tc.want) {
				t.Errorf("got %v, %v; want %v", got, err, tc.want)
			}
		})
	}
	all, err := demoJobs("all@160x120", nil)
	if err != nil || len(all) < 30 || all[0].w != 160 {
		t.Errorf("all@160x120: %d jobs, %v", len(all), err)
	}
}

// TestDemoSizesAndBaseline runs the demo on one small scene at 160×120
// with the reference follower and checks the files, the per-size table
// with its overall lines, and the README markers being filled.
func TestDemoSizesAndBaseline(t *testing.T) {
	out := t.TempDir()
	readme := filepath.Join(out, "README.md")
	os.WriteFile(readme, []byte("# x\n<!-- scores:begin -->\nold\n<!-- scores:end -->\ntail\n"), 0o644)
	code, stdout, stderr := runCmd(t, "demo", "-out", out, "-scenario", "weave@160x120", "-baseline", "-jobs", "2", "-readme", readme)
	if code != 0 {
		t.Fatalf("demo exit %d: %s", code, stderr)
	}
	for _, f := range []string{"weave@160x120.avi", "weave@160x120.truth.ndjson", "weave@160x120.track.ndjson",
		"weave@160x120.plain.track.ndjson", "weave@160x120.annotated.avi", "summary.md"} {
		if st, err := os.Stat(filepath.Join(out, f)); err != nil || st.Size() == 0 {
			t.Errorf("%s missing or empty: %v", f, err)
		}
	}
	for _, want := range []string{"### 160×120", "| weave | 300 |", "| stripe overall |", "| plain follower, stripe overall |",
		"160×120 stripe, hewline (1 scenes)", "160×120 stripe, plain follower (1 scenes)"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("output lacks %q:\n%s", want, stdout)
		}
	}
	b, _ := os.ReadFile(readme)
	if s := string(b); strings.Contains(s, "old") || !strings.Contains(s, "### 160×120") || !strings.HasSuffix(s, "<!-- scores:end -->\ntail\n") {
		t.Errorf("README not filled between the markers:\n%s", s)
	}

	// misses on the demo's own log and truth: its right frames are the
	// table's recall × 300, and its first run is the start, spent seeking
	// for the 0.2 s the tracker sees a line before it trusts it (6 frames
	// at 30 frames/s).
	code, mo, me := runCmd(t, "misses", filepath.Join(out, "weave@160x120.track.ndjson"), filepath.Join(out, "weave@160x120.truth.ndjson"))
	if code != 0 {
		t.Fatalf("misses exit %d: %s", code, me)
	}
	var recall float64
	for _, l := range strings.Split(stdout, "\n") {
		if strings.HasPrefix(l, "| weave | 300 | 300 | ") {
			fmt.Sscanf(strings.TrimPrefix(l, "| weave | 300 | 300 | "), "%f", &recall)
		}
	}
	if want := fmt.Sprintf("300 frames; right %d,", int(math.Round(recall*300))); recall == 0 || !strings.Contains(mo, want) {
		t.Errorf("misses output lacks %q (recall %.3f):\n%s", want, recall, mo)
	}
	if !strings.Contains(mo, "\n  frames 0–5 (6): missed, ") || !strings.Contains(mo, "; seeking; tracker: ") {
		t.Errorf("misses: the first run is not the 6 seeking frames:\n%s", mo)
	}
}

// TestCameraSet: the cheap-camera rows combine dashed or dotted scenes,
// grazing low-camera scenes and every clip of 320×240 or less, and count
// a clip in several groups once in the last row.
func TestCameraSet(t *testing.T) {
	clip := func(tags []string, w, h, visible, correct int) *demoOutcome {
		return &demoOutcome{w: w, h: h, tags: tags, res: &clipResult{score: &score.Result{Frames: visible, VisibleFrames: visible, CorrectFrames: correct}}}
	}
	done := []*demoOutcome{
		clip([]string{"dashed"}, 640, 480, 100, 90),
		clip([]string{"dotted"}, 160, 120, 100, 100),
		clip([]string{"grazing", "horizon"}, 1280, 720, 100, 95),
		clip([]string{"glare"}, 320, 240, 100, 80),
		clip([]string{"glare"}, 640, 480, 100, 10), // in no group
	}
	want := map[string]float64{
		"dashed and dotted (2 clips)":   0.95,
		"low camera (1 clips)":          0.95,
		"320×240 and smaller (2 clips)": 0.90,
		"all of these (4 clips)":        0.9125,
	}
	rows := cameraSet(done)
	if len(rows) != len(want) {
		t.Fatalf("%d rows, want %d", len(rows), len(want))
	}
	for _, r := range rows {
		w, ok := want[r.Name]
		if !ok {
			t.Errorf("unexpected row %q", r.Name)
			continue
		}
		if got := r.Recall(); math.Abs(got-w) > 1e-9 {
			t.Errorf("%s: recall %.4f, want %.4f", r.Name, got, w)
		}
	}
	if rows := cameraSet(done[4:]); len(rows) != 0 {
		t.Errorf("%d rows from a clip in no group, want none", len(rows))
	}
}
