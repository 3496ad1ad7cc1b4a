package truth

import (
	"bytes"
	"os"
	"reflect"
	"testing"
)

// TestReadOlderFiles: files written before lane mode still read.
// stripe-9039fbd.ndjson was written by synth (scenario "gap", three
// frames, points trimmed to four) at commit 9039fbd, before the lane
// fields existed; header-without-follow.ndjson has no follow field at all.
func TestReadOlderFiles(t *testing.T) {
	for _, tc := range []struct {
		name, file string
		frames     int
		follow     string
	}{
		{"stripe file before lane mode", "testdata/stripe-9039fbd.ndjson", 3, "stripe"},
		{"header without follow", "testdata/header-without-follow.ndjson", 1, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			f, err := os.Open(tc.file)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			h, frames, err := Read(f)
			if err != nil {
				t.Fatal(err)
			}
			if len(frames) != tc.frames || h.Follow != tc.follow {
				t.Fatalf("%d frames, follow %q", len(frames), h.Follow)
			}
			for _, fr := range frames {
				if fr.Left != nil || fr.Right != nil || fr.LaneWidthPx != 0 || len(fr.Points) == 0 {
					t.Errorf("frame %d: %+v", fr.Frame, fr)
				}
			}
		})
	}
}

// TestLaneRoundTrip: lane fields survive a write and a read.
func TestLaneRoundTrip(t *testing.T) {
	var b bytes.Buffer
	w, err := NewWriter(&b, Header{Scenario: "x", Follow: "lane", Width: 640, Height: 480, FPS: 30, Frames: 1, RefRow: 384})
	if err != nil {
		t.Fatal(err)
	}
	in := Frame{Visible: true, Points: [][2]float64{{320, 478}}, Left: [][2]float64{{115, 478}}, Right: [][2]float64{{525, 478}},
		LaneWidthPx: 337.2, LaneWidthM: 0.9, Tags: []string{"lane"}}
	if err := w.Write(in); err != nil {
		t.Fatal(err)
	}
	h, out, err := Read(&b)
	if err != nil {
		t.Fatal(err)
	}
	if h.Follow != "lane" || len(out) != 1 || !reflect.DeepEqual(out[0], in) {
		t.Errorf("got %+v %+v, want %+v", h, out, in)
	}
}
