package audio

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"sync"
)

// WAVSink writes 16-bit PCM stereo to a RIFF/WAVE file. The header's sizes
// are brought up to date after every Write, so a crash loses at most the
// buffer being written; Close fixes them a last time.
type WAVSink struct {
	mu     sync.Mutex // Halt may come from another goroutine
	f      *os.File
	path   string
	rate   int
	data   int64 // bytes of sample data written
	buf    []byte
	halted bool
	err    error
}

const wavHeaderLen = 44

// NewWAVSink creates (or truncates) path and writes a WAV header for
// rate samples per second, 2 channels, 16 bits.
func NewWAVSink(path string, rate int) (*WAVSink, error) {
	if rate <= 0 {
		return nil, badf("wav %s: sample rate %d", path, rate)
	}
	f, err := os.Create(path)
	if err != nil {
		return nil, fmt.Errorf("audio: create wav: %w", err)
	}
	w := &WAVSink{f: f, path: path, rate: rate}
	if _, err := f.Write(wavHeader(rate, 0)); err != nil {
		f.Close()
		return nil, fmt.Errorf("audio: write wav %s: %w", path, err)
	}
	return w, nil
}

// wavHeader is the 44-byte canonical PCM header for dataBytes of samples.
func wavHeader(rate int, dataBytes int64) []byte {
	const channels, bits = 2, 16
	h := make([]byte, wavHeaderLen)
	le := binary.LittleEndian
	copy(h[0:], "RIFF")
	le.PutUint32(h[4:], uint32(36+dataBytes))
	copy(h[8:], "WAVE")
	copy(h[12:], "fmt ")
	le.PutUint32(h[16:], 16)
	le.PutUint16(h[20:], 1) // PCM
	le.PutUint16(h[22:], channels)
	le.PutUint32(h[24:], uint32(rate))
	le.PutUint32(h[28:], uint32(rate*channels*bits/8))
	le.PutUint16(h[32:], channels*bits/8)
	le.PutUint16(h[34:], bits)
	copy(h[36:], "data")
	le.PutUint32(h[40:], uint32(dataBytes))
	return h
}

// Path returns the file's name.
func (w *WAVSink) Path() string { return w.path }

// Write appends interleaved stereo samples (clipped to ±1, rounded to 16
// bits). It does not retain samples. After Halt it discards them.
func (w *WAVSink) Write(samples []float32) error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.f == nil {
		return fmt.Errorf("audio: wav %s: write after close", w.path)
	}
	if w.err != nil {
		return w.err
	}
	if w.halted || len(samples) == 0 {
		return nil
	}
	if len(samples)%2 != 0 {
		return fmt.Errorf("audio: wav %s: %d samples is not whole stereo frames", w.path, len(samples))
	}
	if need := 2 * len(samples); cap(w.buf) < need {
		w.buf = make([]byte, need)
	}
	b := w.buf[:2*len(samples)]
	for i, v := range samples {
		x := math.Round(float64(v) * 32767)
		x = math.Max(-32768, math.Min(32767, x))
		binary.LittleEndian.PutUint16(b[2*i:], uint16(int16(x)))
	}
	if _, err := w.f.Write(b); err != nil {
		w.err = fmt.Errorf("audio: write wav %s: %w", w.path, err)
		return w.err
	}
	w.data += int64(len(b))
	if err := w.fixHeader(); err != nil {
		w.err = err
		return err
	}
	return nil
}

func (w *WAVSink) fixHeader() error {
	var b [4]byte
	binary.LittleEndian.PutUint32(b[:], uint32(36+w.data))
	if _, err := w.f.WriteAt(b[:], 4); err != nil {
		return fmt.Errorf("audio: wav %s header: %w", w.path, err)
	}
	binary.LittleEndian.PutUint32(b[:], uint32(w.data))
	if _, err := w.f.WriteAt(b[:], 40); err != nil {
		return fmt.Errorf("audio: wav %s header: %w", w.path, err)
	}
	return nil
}

// Frames returns the number of stereo frames written.
func (w *WAVSink) Frames() int64 {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.data / 4
}

// Halt stops recording at once: later Writes are discarded.
func (w *WAVSink) Halt() error {
	w.mu.Lock()
	defer w.mu.Unlock()
	w.halted = true
	return nil
}

// Close fixes the header and closes the file.
func (w *WAVSink) Close() error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.f == nil {
		return nil
	}
	err := w.fixHeader()
	if cerr := w.f.Close(); err == nil && cerr != nil {
		err = fmt.Errorf("audio: close wav %s: %w", w.path, cerr)
	}
	w.f = nil
	return err
}

// NullSink accepts and discards samples, counting them.
type NullSink struct {
	Samples int64 // interleaved samples accepted
}

// Write counts samples and discards them.
func (n *NullSink) Write(samples []float32) error {
	n.Samples += int64(len(samples))
	return nil
}

// Halt does nothing: a NullSink is always quiet.
func (n *NullSink) Halt() error { return nil }

// Close does nothing.
func (n *NullSink) Close() error { return nil }
