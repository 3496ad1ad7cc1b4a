package siteconfig

import (
	"bufio"
	"errors"
	"flag"
	"image"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/hewline/hewline/audio"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/vision"
)

var update = flag.Bool("update", false, "rewrite the testdata/site/*.golden files")

// TestDefaultsMatchPackages: with no file, every setting is the owning
// package's own default, so a site file changes only what it names.
func TestDefaultsMatchPackages(t *testing.T) {
	s := Default()
	if got, want := s.Vision(), vision.DefaultConfig(); !reflect.DeepEqual(got, want) {
		t.Errorf("Vision() = %+v, want vision.DefaultConfig() %+v", got, want)
	}
	if got, want := s.Tracker(), guidance.DefaultConfig(); !reflect.DeepEqual(got, want) {
		t.Errorf("Tracker() = %+v, want guidance.DefaultConfig() %+v", got, want)
	}
	if got, want := s.Audio(), audio.DefaultMapping(); !reflect.DeepEqual(got, want) {
		t.Errorf("Audio() = %+v, want audio.DefaultMapping() %+v", got, want)
	}
	if got := s.CameraPreference(); got != (v4l2.Preference{}) {
		t.Errorf("CameraPreference() = %+v, want no preference", got)
	}
	if p := s.check(nil); len(p) != 0 {
		t.Errorf("defaults do not pass the checks: %v", Errors(p))
	}
}

// TestExample: the shipped example loads and maps into the packages'
// configurations.
func TestExample(t *testing.T) {
	s, err := Load("example.yaml")
	if err != nil {
		t.Fatalf("example.yaml: %v", err)
	}
	tc := s.Tracker()
	v := s.Vision()
	pref := s.CameraPreference()
	for name, c := range map[string]struct {
		got, want any
	}{
		"fail_safe_after → guidance FailSafeAfter": {tc.FailSafeAfter, 300 * time.Millisecond},
		"reacquire_for → guidance ReacquireFor":    {tc.ReacquireFor, 200 * time.Millisecond},
		"hold_confidence → guidance":               {tc.HoldConfidence, 0.4},
		"unset max_frame_gap keeps the default":    {tc.MaxFrameGap, guidance.DefaultConfig().MaxFrameGap},
		"roi → vision ROI":                         {v.ROI, vision.Region{Left: 0.05, Top: 0.35, Right: 0.95, Bottom: 1}},
		"polarity → vision Polarity":               {v.Polarity, vision.PolarityLight},
		"tape colour → vision TapeColour":          {v.TapeColour, "yellow"},
		"unset work_width keeps the default":       {v.WorkWidth, vision.DefaultConfig().WorkWidth},
		"tape width":                               {float64(s.Detector.TapeWidthMM), 50.0},
		"camera pixel format":                      {pref.Pixel, v4l2.MJPEG},
		"camera size":                              {pref.Size, image.Pt(640, 480)},
		"camera fps":                               {pref.FPS, 30.0},
		"sound mode":                               {s.Audio().Mode, audio.ModeTone},
		"stream heartbeat":                         {s.StreamOptions().Heartbeat, 100 * time.Millisecond},
		"stream never broadcast":                   {s.StreamOptions().AllowBroadcast, false},
		"track dir relative to the file":           {s.Outputs.TrackDir, "logs"},
	} {
		if !reflect.DeepEqual(c.got, c.want) {
			t.Errorf("%s: got %v, want %v", name, c.got, c.want)
		}
	}
	if err := v.Validate(); err != nil {
		t.Errorf("vision: %v", err)
	}
	if err := tc.Validate(); err != nil {
		t.Errorf("guidance: %v", err)
	}
	data, err := os.ReadFile("example.yaml")
	if err != nil || string(data) != ExampleYAML {
		t.Errorf("ExampleYAML differs from example.yaml (%v)", err)
	}
}

// TestTapeWidths: the widths floor tape is sold in, 50, 75 and 100 mm
// (common practice, see /work/shared/REFERENCES.md), are accepted; a width
// given in metres or in centimetres by mistake is not.
func TestTapeWidths(t *testing.T) {
	for name, c := range map[string]struct {
		value string
		ok    bool
	}{
		"50 mm":          {"50", true},
		"75 mm":          {"75", true},
		"100 mm":         {"100", true},
		"unknown":        {"0", true},
		"metres by typo": {"0.05", false},
		"4 mm":           {"4", false},
		"a 2 m plank":    {"2000", false},
		"negative":       {"-50", false},
	} {
		t.Run(name, func(t *testing.T) {
			_, err := Parse("w.yaml", []byte("detector:\n  tape_width_mm: "+c.value+"\n"))
			if (err == nil) != c.ok {
				t.Errorf("tape_width_mm %s: err = %v, want ok=%v", c.value, err, c.ok)
			}
			if err != nil && !strings.HasPrefix(err.Error(), "w.yaml:2: detector.tape_width_mm: ") {
				t.Errorf("error %q does not name line 2 and the field", err)
			}
		})
	}
}

// TestFrameInterval: fail_safe_after must cover one frame interval, 1/fps
// (33.3 ms at 30 fps, 500 ms at 2 fps).
func TestFrameInterval(t *testing.T) {
	for name, c := range map[string]struct {
		fps, after string
		ok         bool
	}{
		"30 fps, 34ms":           {"30", "34ms", true},
		"30 fps, 33ms":           {"30", "33ms", false},
		"fps unset, 30ms":        {"0", "30ms", false},
		"fps unset, 40ms":        {"0", "40ms", true},
		"2 fps, 400ms":           {"2", "400ms", false},
		"2 fps, 600ms":           {"2", "600ms", true},
		"above the 2s ceiling":   {"30", "2.5s", false},
		"zero (alarm at once)":   {"30", "0s", false},
		"negative":               {"30", "-300ms", false},
		"the guidance default":   {"30", "300ms", true},
		"exactly the 2s ceiling": {"30", "2s", true},
	} {
		t.Run(name, func(t *testing.T) {
			_, err := Parse("f.yaml", []byte("camera:\n  fps: "+c.fps+"\nalarm:\n  fail_safe_after: "+c.after+"\n"))
			if (err == nil) != c.ok {
				t.Errorf("fps %s, fail_safe_after %s: err = %v, want ok=%v", c.fps, c.after, err, c.ok)
			}
			if err != nil && !strings.HasPrefix(err.Error(), "f.yaml:4: alarm.fail_safe_after: ") {
				t.Errorf("error %q does not name line 4 and the field", err)
			}
		})
	}
}

// TestBrokenFixtures: each broken file gives exactly the golden error
// lines, one per mistake, in file order.
func TestBrokenFixtures(t *testing.T) {
	files, err := filepath.Glob("testdata/site/*.yaml")
	if err != nil || len(files) == 0 {
		t.Fatalf("no fixtures: %v", err)
	}
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			_, err := Load(f)
			var list Errors
			if !errors.As(err, &list) {
				t.Fatalf("Load = %v, want an Errors list", err)
			}
			got := err.Error() + "\n"
			golden := strings.TrimSuffix(f, ".yaml") + ".golden"
			if *update {
				if err := os.WriteFile(golden, []byte(got), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			want, err := os.ReadFile(golden)
			if err != nil {
				t.Fatalf("%v (run go test -update to create it)", err)
			}
			if got != string(want) {
				t.Errorf("errors differ from %s\ngot:\n%s\nwant:\n%s", golden, got, want)
			}
			for _, p := range list {
				if p.File != f || (p.Line == 0 && filepath.Base(f) != "empty.yaml") {
					t.Errorf("problem %q lacks the file or the line", p)
				}
			}
		})
	}
}

// lineOf returns the 1-based line of the first line of file containing
// s, found independently of the YAML parser.
func lineOf(t *testing.T, file, s string) int {
	t.Helper()
	fh, err := os.Open(file)
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	sc := bufio.NewScanner(fh)
	for n := 1; sc.Scan(); n++ {
		if strings.Contains(sc.Text(), s) {
			return n
		}
	}
	t.Fatalf("%s has no %q", file, s)
	return 0
}

// TestUnknownFieldLine: a misspelt field is reported at its own line
// (counted by scanning the text, not by the parser) with a suggestion.
func TestUnknownFieldLine(t *testing.T) {
	const f = "testdata/site/typo.yaml"
	_, err := Load(f)
	var list Errors
	if !errors.As(err, &list) {
		t.Fatalf("Load = %v", err)
	}
	byField := map[string]Problem{}
	for _, p := range list {
		byField[p.Field] = p
	}
	for name, c := range map[string]struct {
		field, text, suggestion string
	}{
		"top level":     {"camra", "camra:", `"camera"`},
		"in a section":  {"alarm.fail_safe_afer", "fail_safe_afer:", `"fail_safe_after"`},
		"US spelling":   {"detector.tape_color", "tape_color:", `"tape_colour"`},
		"two levels in": {"detector.roi.lft", "lft:", `"left"`},
	} {
		t.Run(name, func(t *testing.T) {
			p, ok := byField[c.field]
			if !ok {
				t.Fatalf("no problem for %s in %v", c.field, list)
			}
			if want := lineOf(t, f, c.text); p.Line != want {
				t.Errorf("%s reported at line %d, want %d", c.field, p.Line, want)
			}
			if !strings.Contains(p.Msg, "unknown field") || !strings.Contains(p.Msg, c.suggestion) {
				t.Errorf("%s: message %q lacks \"unknown field\" or %s", c.field, p.Msg, c.suggestion)
			}
		})
	}
	if len(list) != 4 {
		t.Errorf("got %d problems, want 4 (the misspelt sections' children are not reported again): %v", len(list), list)
	}
}

// newRunFlags declares flags as cmd/hewline's run command does.
func newRunFlags() *flag.FlagSet {
	fs := flag.NewFlagSet("run", flag.ContinueOnError)
	fs.String("camera", "", "")
	fs.Duration("failsafe", guidance.DefaultConfig().FailSafeAfter, "")
	fs.Duration("reacquire", guidance.DefaultConfig().ReacquireFor, "")
	fs.Bool("speaker", true, "")
	fs.Bool("require-alarm", true, "")
	fs.String("stream", "", "")
	fs.String("polarity", "auto", "")
	fs.String("follow", "stripe", "")
	fs.Duration("for", 0, "") // not a site setting
	return fs
}

// TestOverride: only flags the user set override the file; defaults <
// file < flags.
func TestOverride(t *testing.T) {
	for name, c := range map[string]struct {
		args  []string
		check func(t *testing.T, s *Site)
		bad   string // substring of the expected error, "" for none
	}{
		"no flags: the file's values stay": {
			args: nil,
			check: func(t *testing.T, s *Site) {
				if s.Alarm.FailSafeAfter != 300*time.Millisecond || s.Detector.Polarity != "light" || s.Outputs.Stream != "127.0.0.1:47211" {
					t.Errorf("file values changed: %+v %+v", s.Alarm, s.Outputs)
				}
			},
		},
		"flags at their default values still count when given": {
			args: []string{"-failsafe", "300ms", "-reacquire=200ms"},
			check: func(t *testing.T, s *Site) {
				if s.Settings()[indexOf(s, "alarm.fail_safe_after")].From != "flag -failsafe" {
					t.Errorf("fail_safe_after not marked as from the flag: %+v", s.Settings()[indexOf(s, "alarm.fail_safe_after")])
				}
			},
		},
		"set flags win": {
			args: []string{"-failsafe", "150ms", "-camera", "/dev/video2", "-speaker=false", "-polarity", "dark", "-for", "1m"},
			check: func(t *testing.T, s *Site) {
				if got := s.Tracker().FailSafeAfter; got != 150*time.Millisecond {
					t.Errorf("FailSafeAfter = %v, want 150ms from the flag", got)
				}
				if s.Camera.Device != "/dev/video2" || s.Cues.Speaker || s.Vision().Polarity != vision.PolarityDark {
					t.Errorf("flags not applied: %+v %+v", s.Camera, s.Cues)
				}
				if s.Alarm.ReacquireFor != 200*time.Millisecond || s.Camera.FPS != 30 {
					t.Errorf("unset flags or fields changed: %+v %+v", s.Alarm, s.Camera)
				}
			},
		},
		"a flag's bad value is named by the flag": {
			args: []string{"-stream", "255.255.255.255:47211"},
			bad:  "flag -stream (outputs.stream): 255.255.255.255 is a broadcast",
		},
		"a flag below one frame": {
			args: []string{"-failsafe", "20ms"},
			bad:  "flag -failsafe (alarm.fail_safe_after): 20ms is shorter than one frame interval",
		},
	} {
		t.Run(name, func(t *testing.T) {
			s, err := Load("example.yaml")
			if err != nil {
				t.Fatal(err)
			}
			fs := newRunFlags()
			if err := fs.Parse(c.args); err != nil {
				t.Fatal(err)
			}
			err = s.Override(fs)
			switch {
			case c.bad == "" && err != nil:
				t.Fatalf("Override: %v", err)
			case c.bad != "" && (err == nil || !strings.Contains(err.Error(), c.bad)):
				t.Fatalf("Override = %v, want an error containing %q", err, c.bad)
			}
			if c.check != nil {
				c.check(t, s)
			}
		})
	}
}

// TestOverrideUnreadableFlag: a flag.Func flag cannot be read back; it
// is reported rather than dropped.
func TestOverrideUnreadableFlag(t *testing.T) {
	fs := flag.NewFlagSet("run", flag.ContinueOnError)
	fs.Func("polarity", "", func(string) error { return nil })
	if err := fs.Parse([]string{"-polarity", "dark"}); err != nil {
		t.Fatal(err)
	}
	s := Default()
	err := s.Override(fs)
	if err == nil || !strings.Contains(err.Error(), "flag -polarity") {
		t.Fatalf("Override = %v, want a problem naming -polarity", err)
	}
}

func indexOf(s *Site, field string) int {
	for i, st := range s.Settings() {
		if st.Field == field {
			return i
		}
	}
	return -1
}

// TestRelativePaths: a path in the file is relative to the file's folder.
func TestRelativePaths(t *testing.T) {
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "aisle-c.calib.json"), []byte("{}"), 0o644); err != nil {
		t.Fatal(err)
	}
	site := filepath.Join(dir, "site.yaml")
	if err := os.WriteFile(site, []byte("calibration:\n  file: aisle-c.calib.json\noutputs:\n  track_dir: logs\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := Load(site)
	if err != nil {
		t.Fatal(err)
	}
	if want := filepath.Join(dir, "aisle-c.calib.json"); s.Calibration.File != want {
		t.Errorf("calibration.file = %q, want %q", s.Calibration.File, want)
	}
	if want := filepath.Join(dir, "logs"); s.Outputs.TrackDir != want {
		t.Errorf("track_dir = %q, want %q", s.Outputs.TrackDir, want)
	}
}

// TestStreamAddress: the controller stream goes to one receiver; the
// special IPv4/IPv6 addresses are those of RFC 919 (limited broadcast
// 255.255.255.255), RFC 5771 (multicast 224.0.0.0/4), RFC 4291 (ff00::/8,
// unspecified ::) and RFC 1122 (0.0.0.0 as "this host", never a
// destination).
func TestStreamAddress(t *testing.T) {
	for name, c := range map[string]struct {
		addr string
		ok   bool
	}{
		"loopback":              {"127.0.0.1:47211", true},
		"a controller on a LAN": {"10.20.3.7:47211", true},
		"a host name":           {"cart-t3-plc.local:47211", true},
		"no host (loopback)":    {":47211", true},
		"IPv6 loopback":         {"[::1]:47211", true},
		"limited broadcast":     {"255.255.255.255:47211", false},
		"IPv4 multicast":        {"239.1.2.3:47211", false},
		"IPv6 multicast":        {"[ff02::1]:47211", false},
		"unspecified IPv4":      {"0.0.0.0:47211", false},
		"unspecified IPv6":      {"[::]:47211", false},
		"a /24 broadcast":       {"192.168.1.255:47211", false},
		"no port":               {"127.0.0.1", false},
		"port 0":                {"127.0.0.1:0", false},
		"port too big":          {"127.0.0.1:70000", false},
		"named port":            {"127.0.0.1:http", false},
	} {
		t.Run(name, func(t *testing.T) {
			msg := checkStream(c.addr)
			if (msg == "") != c.ok {
				t.Errorf("checkStream(%q) = %q, want ok=%v", c.addr, msg, c.ok)
			}
		})
	}
}

// FuzzParse: no input makes Parse panic, and every problem it reports
// names the file.
func FuzzParse(f *testing.F) {
	for _, seed := range []string{ExampleYAML, "", "a: [", "camera: {width: 1e400}", "alarm: &a\n  x: *a\n", "cues:\n  sound:\n    harmonics: [1, two]\n", "? [a]\n: b\n"} {
		f.Add([]byte(seed))
	}
	files, _ := filepath.Glob("testdata/site/*.yaml")
	for _, p := range files {
		if b, err := os.ReadFile(p); err == nil {
			f.Add(b)
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := Parse("fuzz.yaml", data)
		if err == nil {
			if s == nil {
				t.Fatal("nil site without an error")
			}
			return
		}
		var list Errors
		if !errors.As(err, &list) || len(list) == 0 {
			t.Fatalf("Parse error %v is not a non-empty Errors", err)
		}
		for _, p := range list {
			if p.File != "fuzz.yaml" {
				t.Fatalf("problem %q does not name the file", p)
			}
		}
	})
}
