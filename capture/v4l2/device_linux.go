//go:build linux

package v4l2

import (
	"errors"
	"fmt"
	"image"
	"io"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"syscall"
	"time"

	"github.com/blackjack/webcam"
	"github.com/hewline/hewline/capture"
)

// monoEpoch is the origin of the receipt timestamps (see the package doc:
// webcam v0.6.1 does not expose the driver's buffer timestamps).
var monoEpoch = time.Now()

// DeviceInfo describes one V4L2 capture node.
type DeviceInfo struct {
	// Path is the device node, e.g. /dev/video0.
	Path string
	// Links are the stable names pointing at Path (/dev/v4l/by-id/...,
	// /dev/v4l/by-path/...). Prefer them in site configurations: /dev/videoN
	// numbers can change when cameras are replugged.
	Links []string
	// Name is the driver's card name; Bus its bus location.
	Name, Bus string
	// Formats maps each offered pixel format to the driver's description,
	// including formats hewline cannot decode.
	Formats map[PixelFormat]string
	// Modes lists every (decodable or not) format, size and rate offered.
	Modes []Mode
	// Err says why the node could not be queried (permissions, busy, not a
	// capture node); the other fields are then partly empty.
	Err error
}

// List finds the V4L2 nodes (/dev/video*) and their stable names, and
// queries each one's formats, sizes and rates. An empty list with a nil
// error means no camera is connected (or the driver is not loaded).
func List() ([]DeviceInfo, error) {
	nodes, err := filepath.Glob("/dev/video*")
	if err != nil {
		return nil, fmt.Errorf("v4l2: list devices: %w", err)
	}
	sort.Slice(nodes, func(i, j int) bool { return nodeLess(nodes[i], nodes[j]) })
	links := map[string][]string{}
	for _, dir := range []string{"/dev/v4l/by-id", "/dev/v4l/by-path"} {
		ls, _ := filepath.Glob(dir + "/*")
		for _, l := range ls {
			if real, err := filepath.EvalSymlinks(l); err == nil {
				links[real] = append(links[real], l)
			}
		}
	}
	var out []DeviceInfo
	for _, n := range nodes {
		di := DeviceInfo{Path: n, Links: links[n]}
		queryDevice(&di)
		out = append(out, di)
	}
	return out, nil
}

func nodeLess(a, b string) bool {
	if len(a) != len(b) {
		return len(a) < len(b)
	}
	return a < b
}

func queryDevice(di *DeviceInfo) {
	cam, err := webcam.Open(di.Path)
	if err != nil {
		di.Err = openError(di.Path, err)
		return
	}
	defer cam.Close()
	di.Name, _ = cam.GetName()
	di.Bus, _ = cam.GetBusInfo()
	di.Formats = map[PixelFormat]string{}
	for pf, desc := range cam.GetSupportedFormats() {
		di.Formats[PixelFormat(pf)] = desc
	}
	di.Modes = queryModes(cam)
}

// queryModes enumerates formats × sizes × rates. Stepwise sizes are sampled
// at their maximum and at common sizes inside the range; stepwise rates at
// their fastest and slowest interval.
func queryModes(cam *webcam.Webcam) []Mode {
	var modes []Mode
	for pf := range cam.GetSupportedFormats() {
		for _, fs := range cam.GetSupportedFrameSizes(pf) {
			for _, sz := range sampleSizes(fs) {
				for _, fr := range cam.GetSupportedFramerates(pf, uint32(sz.X), uint32(sz.Y)) {
					for _, fps := range rates(fr) {
						modes = append(modes, Mode{Format: Format{Pixel: PixelFormat(pf), Size: sz}, FPS: fps})
					}
				}
			}
		}
	}
	sort.Slice(modes, func(i, j int) bool {
		a, b := modes[i], modes[j]
		if a.Pixel != b.Pixel {
			return a.Pixel < b.Pixel
		}
		if a.Size.X*a.Size.Y != b.Size.X*b.Size.Y {
			return a.Size.X*a.Size.Y > b.Size.X*b.Size.Y
		}
		return a.FPS > b.FPS
	})
	return modes
}

func sampleSizes(fs webcam.FrameSize) []image.Point {
	if fs.MaxWidth == 0 || fs.MaxHeight == 0 {
		return nil // continuous ranges are not reported by webcam v0.6.1
	}
	if fs.StepWidth == 0 && fs.StepHeight == 0 {
		return []image.Point{{int(fs.MaxWidth), int(fs.MaxHeight)}}
	}
	out := []image.Point{{int(fs.MaxWidth), int(fs.MaxHeight)}}
	for _, c := range []image.Point{{320, 240}, {640, 480}, {1280, 720}} {
		w, h := uint32(c.X), uint32(c.Y)
		if w >= fs.MinWidth && w < fs.MaxWidth && h >= fs.MinHeight && h < fs.MaxHeight &&
			(fs.StepWidth == 0 || (w-fs.MinWidth)%fs.StepWidth == 0) &&
			(fs.StepHeight == 0 || (h-fs.MinHeight)%fs.StepHeight == 0) {
			out = append(out, c)
		}
	}
	return out
}

func rates(fr webcam.FrameRate) []float64 {
	// A frame rate is the inverse of the V4L2 frame interval num/den.
	fps := func(num, den uint32) float64 {
		if num == 0 {
			return 0
		}
		return float64(den) / float64(num)
	}
	fast := fps(fr.MinNumerator, fr.MinDenominator)
	if fr.StepNumerator == 0 && fr.StepDenominator == 0 {
		if fast > 0 {
			return []float64{fast}
		}
		return nil
	}
	// Stepwise: interval from min to max; fastest is the smallest interval.
	a, b := fast, fps(fr.MaxNumerator, fr.MaxDenominator)
	var out []float64
	for _, v := range []float64{a, b} {
		if v > 0 && (len(out) == 0 || out[0] != v) {
			out = append(out, v)
		}
	}
	return out
}

// openError turns an open failure into a message naming the likely causes.
func openError(path string, err error) error {
	var errno syscall.Errno
	if errors.As(err, &errno) {
		switch errno {
		case syscall.ENOENT:
			return fmt.Errorf("v4l2: open %s: no such device (camera unplugged, loose cable, or wrong name; run \"hewline cameras\"): %w", path, capture.ErrNotFound)
		case syscall.EACCES, syscall.EPERM:
			return fmt.Errorf("v4l2: open %s: permission denied (add the user to the \"video\" group and log in again): %w", path, err)
		case syscall.EBUSY:
			return fmt.Errorf("v4l2: open %s: device busy (another program is using the camera): %w", path, err)
		case syscall.ENODEV, syscall.ENXIO, syscall.EIO:
			return fmt.Errorf("v4l2: open %s: device not responding (unplugged, cable, or driver problem): %w: %w", path, ErrGone, err)
		case syscall.ENOTTY, syscall.EINVAL:
			return fmt.Errorf("v4l2: open %s: not a V4L2 capture device (wrong node?): %w", path, err)
		}
	}
	if strings.Contains(err.Error(), "Not a video capture device") || strings.Contains(err.Error(), "streaming I/O") {
		// UVC cameras also create a metadata node, usually the odd number.
		return fmt.Errorf("v4l2: open %s: %v (often the camera's metadata node; try the other /dev/video number): %w", path, err, capture.ErrUnreadable)
	}
	return fmt.Errorf("v4l2: open %s: %w", path, err)
}

// Device is one V4L2 camera streaming one mode. It implements RawCamera; a
// Supervisor drives it. Open, ReadRaw and Close must be called from one
// goroutine.
type Device struct {
	path string
	mode Mode

	mu  sync.Mutex
	cam *webcam.Webcam
	fmt Format
}

// NewDevice opens path (a /dev/videoN node or a stable /dev/v4l/by-id name)
// briefly to query its modes and choose one with ChooseMode. Streaming
// starts with Open. The stable name is reopened by name after a replug, so
// the camera is found again even if its /dev/videoN number changed.
func NewDevice(path string, pref Preference) (*Device, error) {
	cam, err := webcam.Open(path)
	if err != nil {
		return nil, openError(path, err)
	}
	modes := queryModes(cam)
	cam.Close()
	m, err := ChooseMode(modes, pref)
	if err != nil {
		return nil, fmt.Errorf("v4l2: %s: %w", path, err)
	}
	return &Device{path: path, mode: m}, nil
}

// Mode is the chosen mode; the driver may adjust it on Open (see Format).
func (d *Device) Mode() Mode { return d.mode }

// Open configures the chosen mode with two driver buffers and starts
// streaming.
func (d *Device) Open() error {
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.cam != nil {
		return nil
	}
	cam, err := webcam.Open(d.path)
	if err != nil {
		return openError(d.path, err)
	}
	pf, w, h, err := cam.SetImageFormat(webcam.PixelFormat(d.mode.Pixel), uint32(d.mode.Size.X), uint32(d.mode.Size.Y))
	if err != nil {
		cam.Close()
		return fmt.Errorf("v4l2: %s: set format %v: %w", d.path, d.mode.Format, err)
	}
	f := Format{Pixel: PixelFormat(pf), Size: image.Pt(int(w), int(h))}
	if !f.Pixel.Decodable() {
		cam.Close()
		return fmt.Errorf("v4l2: %s: driver chose format %v, which hewline cannot decode: %w", d.path, f.Pixel, capture.ErrUnreadable)
	}
	// The rate is a request; drivers round it. A failure here is not fatal.
	_ = cam.SetFramerate(float32(d.mode.FPS))
	if err := cam.SetBufferCount(2); err != nil {
		cam.Close()
		return fmt.Errorf("v4l2: %s: %w", d.path, err)
	}
	if err := cam.StartStreaming(); err != nil {
		cam.Close()
		return fmt.Errorf("v4l2: %s: %w", d.path, err)
	}
	d.cam, d.fmt = cam, f
	return nil
}

// ReadRaw waits up to one second for a frame and copies it out of the
// driver's mmap buffer into buf (owned by the caller; not retained). The
// driver buffer is returned to the driver before ReadRaw returns. ts is the
// monotonic receipt time (see the package doc).
func (d *Device) ReadRaw(buf []byte) (int, time.Duration, Format, error) {
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.cam == nil {
		return 0, 0, Format{}, fmt.Errorf("v4l2: %s: %w", d.path, ErrClosed)
	}
	err := d.cam.WaitForFrame(1) // seconds
	var to *webcam.Timeout
	if errors.As(err, &to) {
		return 0, 0, d.fmt, fmt.Errorf("v4l2: %s: %w", d.path, ErrTimeout)
	}
	if err != nil {
		return 0, 0, d.fmt, d.readError(err)
	}
	frame, index, err := d.cam.GetFrame()
	ts := time.Since(monoEpoch)
	if errors.Is(err, syscall.EAGAIN) {
		return 0, 0, d.fmt, fmt.Errorf("v4l2: %s: %w", d.path, ErrTimeout)
	}
	if err != nil {
		return 0, 0, d.fmt, d.readError(err)
	}
	n := len(frame)
	if n > len(buf) {
		_ = d.cam.ReleaseFrame(index)
		return n, ts, d.fmt, io.ErrShortBuffer
	}
	copy(buf, frame) // frame aliases the mmap region: copy before release
	if err := d.cam.ReleaseFrame(index); err != nil {
		return 0, 0, d.fmt, d.readError(err)
	}
	return n, ts, d.fmt, nil
}

func (d *Device) readError(err error) error {
	if errors.Is(err, syscall.ENODEV) || errors.Is(err, syscall.EIO) || errors.Is(err, syscall.ENXIO) {
		return fmt.Errorf("v4l2: %s: %w (unplugged or driver reset): %w", d.path, ErrGone, err)
	}
	return fmt.Errorf("v4l2: %s: read: %w", d.path, err)
}

// Close stops streaming and closes the node. Open may be called again.
func (d *Device) Close() error {
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.cam == nil {
		return nil
	}
	err := d.cam.Close()
	d.cam = nil
	if err != nil {
		return fmt.Errorf("v4l2: close %s: %w", d.path, err)
	}
	return nil
}

var _ RawCamera = (*Device)(nil)
