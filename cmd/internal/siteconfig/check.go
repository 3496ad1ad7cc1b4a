package siteconfig

import (
	"fmt"
	"math"
	"net"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/hewline/hewline/audio"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/hewline/hewline/vision"
)

// Limits that Load enforces beyond what the packages themselves check.
const (
	// MinTapeWidthMM and MaxTapeWidthMM bound a plausible floor stripe:
	// aisle tape is sold 50–150 mm wide (common practice); narrower than
	// 5 mm or wider than 300 mm is taken as a typo (for example metres
	// or inches instead of millimetres).
	MinTapeWidthMM = 5
	MaxTapeWidthMM = 300
	// MinLaneWidthMM and MaxLaneWidthMM bound a plausible marked lane,
	// centre to centre of its lines: from a narrow test track to a wide
	// aisle (a judgement, not a standard).
	MinLaneWidthMM = 300
	MaxLaneWidthMM = 10000
	// MaxFailSafeAfter is the longest accepted fail-safe delay. Our own
	// choice: at 1 m/s a cart would drive 2 m without a trusted line
	// before the alarm sounds.
	MaxFailSafeAfter = 2 * time.Second
	// MaxReacquireFor is the longest accepted re-acquisition time.
	MaxReacquireFor = 10 * time.Second
	// assumedFPS is the frame rate used for the one-frame check when the
	// file leaves camera.fps open (v4l2.ChooseMode looks for 30 fps).
	assumedFPS = v4l2.DefaultMinFPS
)

// checker collects problems, each at the line of the field it names.
type checker struct {
	s     *Site
	probs []Problem
	// failed holds the paths whose value could not be read: they hold
	// the default, so checking them again would only add a false problem.
	failed map[string]bool
}

// line returns the line of path in the file, or of its closest section
// that is in the file, or 0.
func (c *checker) line(path string) int {
	for p := path; p != ""; {
		if n, ok := c.s.lines[p]; ok {
			return n
		}
		i := strings.LastIndexByte(p, '.')
		if i < 0 {
			break
		}
		p = p[:i]
	}
	return 0
}

// bad records a problem with field path. A field set by a flag is named
// by its flag.
func (c *checker) bad(path, format string, a ...any) {
	if !c.ok(path) {
		return
	}
	msg := fmt.Sprintf(format, a...)
	if fl, ok := c.s.flags[path]; ok {
		c.probs = append(c.probs, Problem{Field: "flag -" + fl + " (" + path + ")", Msg: msg})
		return
	}
	c.probs = append(c.probs, Problem{File: c.s.file, Line: c.line(path), Field: path, Msg: msg})
}

// ok reports whether none of paths, nor a section holding one, failed to
// decode.
func (c *checker) ok(paths ...string) bool {
	for _, p := range paths {
		for q := p; q != ""; {
			if c.failed[q] {
				return false
			}
			i := strings.LastIndexByte(q, '.')
			if i < 0 {
				break
			}
			q = q[:i]
		}
	}
	return true
}

// count returns how many problems were recorded, to tell whether a
// section's own checks found anything.
func (c *checker) count() int { return len(c.probs) }

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func (c *checker) fraction(path string, v float64) {
	if !finite(v) || v < 0 || v > 1 {
		c.bad(path, "%v is not a fraction (want 0..1 of the frame)", v)
	}
}

func (c *checker) duration(path string, v, lo, hi time.Duration, why string) {
	switch {
	case v < 0:
		c.bad(path, "%v is negative (want %v..%v)", v, lo, hi)
	case v < lo || v > hi:
		c.bad(path, "%v is outside %v..%v%s", v, lo, hi, why)
	}
}

// check validates every field and returns the problems found.
// Fields in failed (which could not be decoded) are not checked again.
func (s *Site) check(failed map[string]bool) []Problem {
	c := &checker{s: s, failed: failed}

	// camera
	cam := s.Camera
	if cam.PixelFormat != "" {
		if _, err := v4l2.ParsePixelFormat(cam.PixelFormat); err != nil {
			c.bad("camera.pixel_format", "%q is not known (want mjpeg or yuyv, or leave it empty for either)", cam.PixelFormat)
		}
	}
	for _, f := range []struct {
		path string
		v    int
	}{{"camera.width", cam.Width}, {"camera.height", cam.Height}} {
		if f.v < 0 || f.v > 4096 {
			c.bad(f.path, "%d pixels (want 1..4096, or 0 to let hewline choose)", f.v)
		}
	}
	if c.ok("camera.width") && (cam.Width == 0) != (cam.Height == 0) {
		c.bad("camera.height", "give both width and height, or neither")
	}
	if !finite(cam.FPS) || cam.FPS < 0 || cam.FPS > 240 {
		c.bad("camera.fps", "%v frames per second (want 1..240, or 0 to let hewline choose)", cam.FPS)
	} else if cam.FPS > 0 && cam.FPS < 1 {
		c.bad("camera.fps", "%v frames per second is too slow to guide a vehicle (want 1..240)", cam.FPS)
	}

	// follow
	switch strings.ToLower(strings.TrimSpace(s.Follow)) {
	case "stripe", "lane":
	default:
		c.bad("follow", "%q is not a follow mode (want stripe or lane)", s.Follow)
	}

	// lane
	ln := s.Lane
	if w := float64(ln.WidthMM); !finite(w) || w != 0 && (w < MinLaneWidthMM || w > MaxLaneWidthMM) {
		c.bad("lane.width_mm", "%v mm is not a plausible lane width (want %d..%d mm, or 0 to learn it)", w, MinLaneWidthMM, MaxLaneWidthMM)
	} else if w > 0 && s.Calibration.File == "" {
		c.bad("lane.width_mm", "a lane width in mm needs a calibration (calibration.file); without one give lane.width_px")
	}
	if w := ln.WidthPx; !finite(w) || w < 0 || w > 20000 {
		c.bad("lane.width_px", "%v px is not a lane width (want more than 0, or 0 to learn it)", w)
	}
	if ln.WidthMM > 0 && ln.WidthPx > 0 {
		c.bad("lane.width_px", "give the lane width once: width_mm (with a calibration) or width_px")
	}

	// detector
	det := s.Detector
	before := c.count()
	roi := det.ROI
	c.fraction("detector.roi.left", roi.Left)
	c.fraction("detector.roi.top", roi.Top)
	c.fraction("detector.roi.right", roi.Right)
	c.fraction("detector.roi.bottom", roi.Bottom)
	if c.count() == before {
		if roi.Right-roi.Left < 0.1 {
			c.bad("detector.roi.right", "right %v must be at least 0.1 past left %v", roi.Right, roi.Left)
		}
		if roi.Bottom-roi.Top < 0.1 {
			c.bad("detector.roi.bottom", "bottom %v must be at least 0.1 below top %v", roi.Bottom, roi.Top)
		}
	}
	if _, err := vision.ParsePolarity(det.Polarity); err != nil {
		c.bad("detector.polarity", "%q is not known (want auto, light or dark)", det.Polarity)
	}
	if _, _, err := vision.ParseTapeColour(det.TapeColour); err != nil {
		c.bad("detector.tape_colour", "%q is not a tape colour (want yellow, orange, red, green, blue, bgr:B,G,R, or none for white, grey and black tape)", det.TapeColour)
	}
	if w := float64(det.TapeWidthMM); !finite(w) || w != 0 && (w < MinTapeWidthMM || w > MaxTapeWidthMM) {
		c.bad("detector.tape_width_mm", "%v mm is not a plausible tape width (want %d..%d mm, or 0 if unknown)", w, MinTapeWidthMM, MaxTapeWidthMM)
	}
	if !finite(det.RefRow) || det.RefRow <= 0 || det.RefRow >= 1 {
		c.bad("detector.ref_row", "%v is not a fraction inside the frame (want more than 0, less than 1)", det.RefRow)
	}
	if c.count() == before {
		// The remaining detector fields as the detector itself sees them.
		if err := s.Vision().Validate(); err != nil {
			c.bad("detector", "%s", oneLine(err))
		}
	}

	// alarm
	fps := cam.FPS
	fpsNote := fmt.Sprintf("at camera.fps %g", fps)
	if !(fps >= 1) || !c.ok("camera.fps") {
		fps, fpsNote = assumedFPS, fmt.Sprintf("at %d fps, as camera.fps is not set", assumedFPS)
	}
	frame := time.Duration(float64(time.Second) / fps).Round(100 * time.Microsecond)
	al := s.Alarm
	switch {
	case al.FailSafeAfter < 0:
		c.bad("alarm.fail_safe_after", "%v is negative (want %v..%v)", al.FailSafeAfter, frame, MaxFailSafeAfter)
	case al.FailSafeAfter < frame:
		c.bad("alarm.fail_safe_after", "%v is shorter than one frame interval (%v %s): the alarm would sound between any two frames (want at least %v)", al.FailSafeAfter, frame, fpsNote, frame)
	case al.FailSafeAfter > MaxFailSafeAfter:
		c.bad("alarm.fail_safe_after", "%v is too long: the vehicle would run that long without a trusted line before the alarm (want at most %v)", al.FailSafeAfter, MaxFailSafeAfter)
	}
	c.duration("alarm.reacquire_for", al.ReacquireFor, 0, MaxReacquireFor, "")

	// tracker
	before = c.count()
	c.duration("tracker.max_frame_gap", s.Track.MaxFrameGap, time.Millisecond, 10*time.Second, "")
	if c.count() == before {
		// The alarm timing is checked above, with its own lines.
		tc := s.Tracker()
		def := Default().Tracker()
		tc.FailSafeAfter, tc.ReacquireFor = def.FailSafeAfter, def.ReacquireFor
		if err := tc.Validate(); err != nil {
			c.bad("tracker", "%s", oneLine(err))
		}
	}

	// cues
	cu := s.Cues
	if m := cu.Sound.Mode; m != audio.ModeTone && m != audio.ModePulse {
		c.bad("cues.sound.mode", "%q is not a cue mode (want %s or %s)", m, audio.ModeTone, audio.ModePulse)
	} else if err := cu.Sound.Validate(); err != nil {
		c.bad("cues.sound", "%s", strings.TrimPrefix(oneLine(err), "audio: bad configuration: "))
	}
	if cu.VibrateGPIO != "" {
		pins := strings.Split(cu.VibrateGPIO, ",")
		if len(pins) != 2 || strings.TrimSpace(pins[0]) == "" || strings.TrimSpace(pins[1]) == "" || strings.TrimSpace(pins[0]) == strings.TrimSpace(pins[1]) {
			c.bad("cues.vibrate_gpio", "%q: want two different pin names LEFT,RIGHT (for example GPIO17,GPIO27)", cu.VibrateGPIO)
		} else if cu.VibrateSerial != "" {
			c.bad("cues.vibrate_gpio", "give at most one of vibrate_serial and vibrate_gpio")
		}
	}

	// outputs
	out := s.Outputs
	if out.Stream != "" {
		if msg := checkStream(out.Stream); msg != "" {
			c.bad("outputs.stream", "%s", msg)
		}
	}
	c.duration("outputs.stale_after", out.StaleAfter, time.Millisecond, 10*time.Second, "")
	if out.Heartbeat <= 0 || out.Heartbeat >= out.StaleAfter {
		c.bad("outputs.heartbeat", "%v: want more than 0 and less than stale_after (%v), so that a quiet stream is never taken as stale", out.Heartbeat, out.StaleAfter)
	}
	for _, f := range []struct{ path, v string }{{"outputs.track_dir", out.TrackDir}, {"outputs.record_dir", out.RecordDir}} {
		if f.v == "" {
			continue
		}
		if fi, err := os.Stat(f.v); err == nil && !fi.IsDir() {
			c.bad(f.path, "%s is a file, not a folder", f.v)
		}
	}

	// calibration
	cal := s.Calibration
	if cal.File != "" {
		if fi, err := os.Stat(cal.File); err != nil {
			c.bad("calibration.file", "%s: no such file (run hewline calib, or leave it empty for offsets in pixels)", cal.File)
		} else if fi.IsDir() {
			c.bad("calibration.file", "%s is a folder, not a calibration file", cal.File)
		}
	}
	if l := float64(cal.LookaheadMM); !finite(l) || l < 0 || l > 20000 {
		c.bad("calibration.lookahead_mm", "%v mm (want 0..20000; 0 keeps the calibration file's value)", l)
	}
	return c.probs
}

// checkStream returns what is wrong with a controller stream address, or
// "". Names other than IP literals are resolved only when the stream
// opens; ctlstream.NewUDP refuses broadcast there too.
func checkStream(addr string) string {
	host, port, err := net.SplitHostPort(addr)
	if err != nil {
		return fmt.Sprintf("%q is not HOST:PORT (for example 127.0.0.1:47211)", addr)
	}
	if n, err := strconv.Atoi(port); err != nil || n < 1 || n > 65535 {
		return fmt.Sprintf("port %q: want 1..65535", port)
	}
	if ip := net.ParseIP(host); ip != nil && (ip.IsMulticast() || ip.IsUnspecified() || ip.Equal(net.IPv4bcast)) {
		return fmt.Sprintf("%s is a broadcast, multicast or unspecified address: guidance goes to one receiver only (give the controller's own address)", host)
	}
	if strings.HasSuffix(host, ".255") && net.ParseIP(host) != nil {
		return fmt.Sprintf("%s looks like a network's broadcast address: guidance goes to one receiver only (give the controller's own address)", host)
	}
	return ""
}

// oneLine joins a multi-line error into one line.
func oneLine(err error) string { return strings.ReplaceAll(err.Error(), "\n", "; ") }
