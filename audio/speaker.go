package audio

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"sync"
	"time"
)

// ErrNoDevice means no sound device could be opened (no card, or a
// configured device that does not exist).
var ErrNoDevice = errors.New("audio: no sound device")

// ErrDeviceLost means the sound device failed or stopped taking samples
// while playing.
var ErrDeviceLost = errors.New("audio: sound device lost")

// device is what a Speaker needs from the sound library: its error state
// and a player pulling samples from the Speaker's queue.
type device interface {
	Err() error // nil while the device plays
	Play()
	Pause()
	Close() error
}

// Speaker plays through the sound card. Write queues samples and blocks
// while more than one buffer waits, so it paces a real-time Player. Every
// Write checks the device's error state, and a device that stops taking
// samples for the stall time (10 buffers, at least 250 ms) counts as lost; either way Write returns an
// error wrapping ErrDeviceLost and the Speaker stays failed.
//
// Between a sample's rendering and the card sit this queue (one to two
// buffers), the sound library's player buffer (one buffer) and ALSA's
// device buffer (about one buffer): some 60–80 ms at the default 20 ms.
// That figure is worked out, not measured: the build machines have no
// sound card.
type Speaker struct {
	dev   device
	stall time.Duration
	limit int // queued bytes above which Write waits

	mu      sync.Mutex
	cond    *sync.Cond // signalled when data arrives or the speaker closes
	q       []byte     // float32 little-endian, interleaved stereo
	halted  bool
	closed  bool
	playing bool
	err     error
	space   chan struct{} // signalled when Read took data
	release func()        // frees the process-wide device slot; may be nil
}

func newSpeaker(dev device, queueBytes int, stall time.Duration) *Speaker {
	s := &Speaker{dev: dev, stall: stall, limit: queueBytes, space: make(chan struct{}, 1)}
	s.cond = sync.NewCond(&s.mu)
	return s
}

// defaultStall is how long a Speaker waits for the device to take samples
// before calling it lost.
func defaultStall(buffer time.Duration) time.Duration {
	return max(250*time.Millisecond, 10*buffer)
}

// Write queues interleaved stereo samples for playback; it does not retain
// the slice. After Halt it discards them.
func (s *Speaker) Write(samples []float32) error {
	if err := s.check(); err != nil {
		return err
	}
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return errors.New("audio: speaker: write after close")
	}
	if s.halted {
		s.mu.Unlock()
		return nil
	}
	for _, v := range samples {
		s.q = binary.LittleEndian.AppendUint32(s.q, math.Float32bits(v))
	}
	start := !s.playing
	s.playing = true
	s.mu.Unlock()
	s.cond.Broadcast()
	if start {
		go s.dev.Play() // Play reads the queue; it must not hold this call
	}
	return s.waitRoom()
}

// waitRoom blocks until the device has taken enough of the queue, the
// speaker is halted, or the device is found lost.
func (s *Speaker) waitRoom() error {
	timer := time.NewTimer(s.stall)
	defer timer.Stop()
	poll := time.NewTicker(5 * time.Millisecond)
	defer poll.Stop()
	for {
		s.mu.Lock()
		n, halted := len(s.q), s.halted || s.closed
		s.mu.Unlock()
		if n <= s.limit || halted {
			return nil
		}
		if err := s.check(); err != nil {
			return err
		}
		select {
		case <-s.space:
		case <-poll.C:
		case <-timer.C:
			return s.fail(fmt.Errorf("%w: no samples taken for %v", ErrDeviceLost, s.stall))
		}
	}
}

// check returns the sticky error, recording the device's own.
func (s *Speaker) check() error {
	s.mu.Lock()
	err := s.err
	s.mu.Unlock()
	if err != nil {
		return err
	}
	if derr := s.dev.Err(); derr != nil {
		return s.fail(fmt.Errorf("%w: %w", ErrDeviceLost, derr))
	}
	return nil
}

func (s *Speaker) fail(err error) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.err == nil {
		s.err = err
	}
	return s.err
}

// Read hands queued bytes to the sound library's player. It blocks while
// the queue is empty and returns io.EOF once the speaker is closed.
func (s *Speaker) Read(p []byte) (int, error) {
	s.mu.Lock()
	for len(s.q) == 0 && !s.closed {
		s.cond.Wait()
	}
	if s.closed {
		s.mu.Unlock()
		return 0, io.EOF
	}
	n := copy(p, s.q)
	s.q = s.q[:copy(s.q, s.q[n:])]
	s.mu.Unlock()
	select {
	case s.space <- struct{}{}:
	default:
	}
	return n, nil
}

// Err returns the error that made the speaker fail, if any.
func (s *Speaker) Err() error { return s.check() }

// Halt silences the speaker at once: it drops what is queued, pauses the
// player and discards later Writes.
func (s *Speaker) Halt() error {
	s.mu.Lock()
	s.halted = true
	s.q = s.q[:0]
	s.mu.Unlock()
	s.dev.Pause()
	return nil
}

// Close halts the speaker and releases its player. The sound library's
// context stays open for the process (it cannot be made twice), so a new
// Speaker can be opened afterwards.
func (s *Speaker) Close() error {
	s.Halt()
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil
	}
	s.closed = true
	s.mu.Unlock()
	s.cond.Broadcast()
	err := s.dev.Close()
	if s.release != nil {
		s.release()
	}
	if err != nil {
		return fmt.Errorf("audio: close speaker: %w", err)
	}
	return nil
}
