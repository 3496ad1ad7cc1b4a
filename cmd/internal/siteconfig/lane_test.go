package siteconfig

import (
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestFollowLane: a site may follow a lane; the mode is read in any case.
func TestFollowLane(t *testing.T) {
	for name, in := range map[string]string{"lower": "follow: lane\n", "upper": "follow: LANE\n"} {
		t.Run(name, func(t *testing.T) {
			s, err := Parse("lane.yaml", []byte(in))
			if err != nil {
				t.Fatal(err)
			}
			if s.Follow != "lane" {
				t.Errorf("follow %q", s.Follow)
			}
		})
	}
}

// TestLaneWidth: the lane's width is given in millimetres with a
// calibration or in pixels without one, once; implausible values are
// refused with the field named.
func TestLaneWidth(t *testing.T) {
	cal := filepath.Join(t.TempDir(), "cam.calib.json")
	if err := os.WriteFile(cal, []byte("{}"), 0o644); err != nil {
		t.Fatal(err)
	}
	for name, c := range map[string]struct {
		yaml   string
		bad    string // substring of the expected error, "" for none
		mm, px float64
	}{
		"learned":          {yaml: "follow: lane\n"},
		"px":               {yaml: "lane:\n  width_px: 340\n", px: 340},
		"mm with a calib":  {yaml: "calibration:\n  file: " + cal + "\nlane:\n  width_mm: 900\n", mm: 900},
		"mm without calib": {yaml: "lane:\n  width_mm: 900\n", bad: "lane.width_mm"},
		"mm too narrow":    {yaml: "calibration:\n  file: " + cal + "\nlane:\n  width_mm: 50\n", bad: "not a plausible lane width"},
		"both":             {yaml: "calibration:\n  file: " + cal + "\nlane:\n  width_mm: 900\n  width_px: 340\n", bad: "give the lane width once"},
		"negative px":      {yaml: "lane:\n  width_px: -3\n", bad: "lane.width_px"},
	} {
		t.Run(name, func(t *testing.T) {
			s, err := Parse("lane.yaml", []byte(c.yaml))
			if c.bad != "" {
				if err == nil || !strings.Contains(err.Error(), c.bad) {
					t.Fatalf("Parse = %v, want an error containing %q", err, c.bad)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if float64(s.Lane.WidthMM) != c.mm || s.Lane.WidthPx != c.px {
				t.Errorf("lane %+v, want %v mm, %v px", s.Lane, c.mm, c.px)
			}
		})
	}
}

// TestLaneWidthFlags: -lane-width-px and -lane-width-mm override the
// site's lane width; a width in mm without a calibration is refused,
// named by its flag.
func TestLaneWidthFlags(t *testing.T) {
	for name, c := range map[string]struct {
		args []string
		bad  string
		px   float64
	}{
		"px":           {args: []string{"-lane-width-px", "352.5"}, px: 352.5},
		"mm, no calib": {args: []string{"-lane-width-mm", "900"}, bad: "lane.width_mm"},
		"not a number": {args: []string{"-lane-width-px", "NaN"}, bad: "lane.width_px"},
	} {
		t.Run(name, func(t *testing.T) {
			s := Default()
			fs := flag.NewFlagSet("replay", flag.ContinueOnError)
			fs.Float64("lane-width-px", 0, "")
			fs.Float64("lane-width-mm", 0, "")
			if err := fs.Parse(c.args); err != nil {
				t.Fatal(err)
			}
			err := s.Override(fs)
			if c.bad != "" {
				if err == nil || !strings.Contains(err.Error(), c.bad) {
					t.Fatalf("Override = %v, want an error containing %q", err, c.bad)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if s.Lane.WidthPx != c.px {
				t.Errorf("width_px %v, want %v", s.Lane.WidthPx, c.px)
			}
		})
	}
}
