//go:build !linux || !cgo

package audio

import (
	"fmt"
	"time"
)

// NewSpeaker needs ALSA (Linux with cgo); elsewhere it always fails with
// ErrNoDevice.
func NewSpeaker(rate int, buffer time.Duration) (*Speaker, error) {
	return nil, fmt.Errorf("%w: speaker output needs Linux with cgo", ErrNoDevice)
}

// NewSpeakerStall is NewSpeaker with a stall limit; see the Linux version.
func NewSpeakerStall(rate int, buffer, stall time.Duration) (*Speaker, error) {
	return NewSpeaker(rate, buffer)
}
