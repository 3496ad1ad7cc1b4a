package haptic

import (
	"errors"
	"fmt"
	"io"
	"sync"
)

// Driver sets the two motors. Set must take effect at once (no queue);
// Halt switches both motors off and leaves them off; Close halts and
// releases the hardware.
type Driver interface {
	Set(left, right Level) error
	Halt() error
	Close() error
}

// Sentinel errors.
var (
	// ErrHalted: the driver or vibrator was halted or closed.
	ErrHalted = errors.New("haptic: halted")
	// ErrNoHardware: the platform has no support for the device (stubs).
	ErrNoHardware = errors.New("haptic: no hardware support on this platform")
	// ErrPinNotFound: no GPIO pin of that name.
	ErrPinNotFound = errors.New("haptic: GPIO pin not found")
)

// Serial drives a small motor driver over a byte stream with the line
// protocol in the package documentation. Safe for concurrent use.
type Serial struct {
	mu     sync.Mutex
	w      io.Writer
	c      io.Closer // may be nil
	buf    []byte
	halted bool
	closed bool
}

// NewSerialWriter returns a Serial that writes its lines to w, one Write
// per line. If w is an io.Closer, Close closes it. Serial owns w.
func NewSerialWriter(w io.Writer) *Serial {
	s := &Serial{w: w, buf: make([]byte, 0, 16)}
	if c, ok := w.(io.Closer); ok {
		s.c = c
	}
	return s
}

// Set writes "L <left> R <right>\n".
func (s *Serial) Set(left, right Level) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.halted {
		return ErrHalted
	}
	b := append(s.buf[:0], 'L', ' ')
	b = appendLevel(b, left)
	b = append(b, ' ', 'R', ' ')
	b = appendLevel(b, right)
	b = append(b, '\n')
	s.buf = b
	if _, err := s.w.Write(b); err != nil {
		return fmt.Errorf("haptic: serial write: %w", err)
	}
	return nil
}

func appendLevel(b []byte, l Level) []byte {
	switch {
	case l >= 100:
		b = append(b, '0'+byte(l/100))
		fallthrough
	case l >= 10:
		b = append(b, '0'+byte(l/10%10))
	}
	return append(b, '0'+byte(l%10))
}

// Halt writes "H\n" and makes Set return ErrHalted. Halting twice writes
// H twice (harmless, and a retry when the first was lost).
func (s *Serial) Halt() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return ErrHalted
	}
	s.halted = true
	if _, err := s.w.Write([]byte("H\n")); err != nil {
		return fmt.Errorf("haptic: serial halt: %w", err)
	}
	return nil
}

// Close halts and closes the stream.
func (s *Serial) Close() error {
	herr := s.Halt()
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return nil
	}
	s.closed = true
	if s.c != nil {
		if err := s.c.Close(); err != nil {
			return fmt.Errorf("haptic: serial close: %w", err)
		}
	}
	return herr
}
