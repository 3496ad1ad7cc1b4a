//go:build linux && cgo

package audio

import (
	"errors"
	"fmt"
	"sync"
	"time"

	"github.com/hajimehoshi/oto/v2"
)

// The sound library allows one context per process; it is made by the
// first NewSpeaker and kept, together with its failure if it failed.
var otoState struct {
	sync.Mutex
	ctx   *oto.Context
	rate  int
	err   error
	inUse bool
}

// readyTimeout bounds the wait for the device to open.
const readyTimeout = 5 * time.Second

// NewSpeaker opens the default ALSA device for rate samples per second,
// stereo, with a device buffer of about buffer (≤ MaxBuffer). It waits for
// the device and fails with an error wrapping ErrNoDevice when there is
// none. Only one Speaker may be open at a time, and the rate cannot change
// within a process.
func NewSpeaker(rate int, buffer time.Duration) (*Speaker, error) {
	return NewSpeakerStall(rate, buffer, defaultStall(buffer))
}

// NewSpeakerStall is NewSpeaker with the time after which a device that
// takes no samples counts as lost (ErrDeviceLost). Keep it short on a
// vehicle; a loaded test machine may need more.
func NewSpeakerStall(rate int, buffer, stall time.Duration) (*Speaker, error) {
	if stall < defaultStall(buffer) {
		stall = defaultStall(buffer)
	}
	if buffer <= 0 || buffer > MaxBuffer {
		return nil, badf("speaker buffer %v: want 0 < b ≤ %v", buffer, MaxBuffer)
	}
	if rate < 8000 || rate > 192000 {
		return nil, badf("speaker rate %d", rate)
	}
	otoState.Lock()
	defer otoState.Unlock()
	if otoState.inUse {
		return nil, errors.New("audio: speaker already open")
	}
	if otoState.err != nil {
		return nil, otoState.err
	}
	if otoState.ctx == nil {
		ctx, ready, err := oto.NewContextWithOptions(&oto.NewContextOptions{
			SampleRate: rate, ChannelCount: 2, Format: oto.FormatFloat32LE, BufferSize: buffer,
		})
		if err == nil {
			select {
			case <-ready:
				err = ctx.Err()
			case <-time.After(readyTimeout):
				err = fmt.Errorf("device not ready after %v", readyTimeout)
			}
		}
		if err != nil {
			otoState.err = fmt.Errorf("%w: %w", ErrNoDevice, err)
			return nil, otoState.err
		}
		otoState.ctx, otoState.rate = ctx, rate
	}
	if otoState.rate != rate {
		return nil, fmt.Errorf("audio: speaker already opened at %d samples/s, not %d", otoState.rate, rate)
	}
	frameBytes := 2 * 4
	bufBytes := int(buffer.Seconds()*float64(rate)) * frameBytes
	s := newSpeaker(nil, bufBytes, stall)
	pl := otoState.ctx.NewPlayer(s)
	if bs, ok := pl.(oto.BufferSizeSetter); ok {
		bs.SetBufferSize(bufBytes)
	}
	s.dev = otoDevice{ctx: otoState.ctx, p: pl}
	s.release = releaseSpeaker
	otoState.inUse = true
	return s, nil
}

func releaseSpeaker() {
	otoState.Lock()
	otoState.inUse = false
	otoState.Unlock()
}

type otoDevice struct {
	ctx *oto.Context
	p   oto.Player
}

func (d otoDevice) Err() error {
	if err := d.ctx.Err(); err != nil {
		return err
	}
	return d.p.Err()
}
func (d otoDevice) Play()        { d.p.Play() }
func (d otoDevice) Pause()       { d.p.Pause() }
func (d otoDevice) Close() error { return d.p.Close() }
