//go:build !linux

package v4l2

import (
	"fmt"
	"time"

	"github.com/hewline/hewline/capture"
)

// DeviceInfo describes one V4L2 capture node (Linux only).
type DeviceInfo struct {
	Path      string
	Links     []string
	Name, Bus string
	Formats   map[PixelFormat]string
	Modes     []Mode
	Err       error
}

// List returns capture.ErrNoHardware: V4L2 exists only on Linux.
func List() ([]DeviceInfo, error) {
	return nil, fmt.Errorf("v4l2: list cameras: %w", capture.ErrNoHardware)
}

// Device is a V4L2 camera (Linux only).
type Device struct{ mode Mode }

// NewDevice returns capture.ErrNoHardware: V4L2 exists only on Linux.
func NewDevice(path string, pref Preference) (*Device, error) {
	return nil, fmt.Errorf("v4l2: open %s: %w", path, capture.ErrNoHardware)
}

// Mode is the chosen mode.
func (d *Device) Mode() Mode { return d.mode }

// Open returns capture.ErrNoHardware.
func (d *Device) Open() error { return capture.ErrNoHardware }

// ReadRaw returns capture.ErrNoHardware.
func (d *Device) ReadRaw(buf []byte) (int, time.Duration, Format, error) {
	return 0, 0, Format{}, capture.ErrNoHardware
}

// Close does nothing.
func (d *Device) Close() error { return nil }
