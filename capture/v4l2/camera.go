package v4l2

import "fmt"

// Camera is a supervised V4L2 camera: the frame source the pipeline reads
// in live operation. Read, Info, Stats and Close come from the Supervisor.
type Camera struct {
	*Supervisor
	dev *Device
}

// OpenCamera opens path (a /dev/videoN node or a stable /dev/v4l/by-id
// name), chooses a mode with ChooseMode(pref) and starts streaming under a
// Supervisor configured by opt (opt.Name and opt.FPS default to the path and
// the chosen rate). A missing device wraps capture.ErrNotFound; other
// platforms return capture.ErrNoHardware.
func OpenCamera(path string, pref Preference, opt Options) (*Camera, error) {
	dev, err := NewDevice(path, pref)
	if err != nil {
		return nil, err
	}
	m := dev.Mode()
	if opt.Name == "" {
		opt.Name = path
	}
	if opt.FPS == 0 {
		opt.FPS = m.FPS
	}
	if opt.BufferBytes == 0 {
		opt.BufferBytes = m.Size.X * m.Size.Y * 2
	}
	sup := NewSupervisor(dev, opt)
	if err := sup.Start(); err != nil {
		return nil, err
	}
	return &Camera{Supervisor: sup, dev: dev}, nil
}

// Mode is the mode the camera was asked to stream.
func (c *Camera) Mode() Mode { return c.dev.Mode() }

func (c *Camera) String() string { return fmt.Sprintf("%s (%v)", c.opt.Name, c.dev.Mode()) }
