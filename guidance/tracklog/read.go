package tracklog

import (
	"bufio"
	"bytes"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
)

// ErrBroken marks a log whose chain does not verify or whose lines cannot
// be read; the error text names the first bad line.
var ErrBroken = errors.New("track log broken")

// Log is a whole track log read back.
type Log struct {
	Header  Header
	Records []Record
	// Summary is nil when the log has none (the run was cut short).
	Summary *Summary

	lastChain [32]byte // chain value of the last line that verified
}

// chainMarker precedes the hash on every line.
var chainMarker = []byte(`,"chain":"`)

// Verify checks the chain of every line and returns the number of lines
// that verified. A non-nil error wraps ErrBroken and names the first line
// (1-based) that fails and why.
func Verify(r io.Reader) (int, error) {
	_, n, err := read(r, true)
	return n, err
}

// Read reads and verifies a whole log.
func Read(r io.Reader) (*Log, error) {
	l, _, err := read(r, true)
	return l, err
}

func read(r io.Reader, verify bool) (*Log, int, error) {
	br := bufio.NewReaderSize(r, 1<<16)
	var prev [32]byte
	l := &Log{}
	n := 0
	for line := 1; ; line++ {
		b, err := br.ReadBytes('\n')
		if err == io.EOF && len(b) == 0 {
			break
		}
		if err != nil && err != io.EOF {
			return l, n, fmt.Errorf("tracklog: line %d: %w", line, err)
		}
		if err == io.EOF {
			return l, n, fmt.Errorf("tracklog: line %d: torn last line (no newline; the run was cut off mid-write): %w", line, ErrBroken)
		}
		b = bytes.TrimRight(b, "\r\n")
		i := bytes.LastIndex(b, chainMarker)
		if i < 0 || !bytes.HasSuffix(b, []byte(`"}`)) {
			return l, n, fmt.Errorf("tracklog: line %d: no chain field: %w", line, ErrBroken)
		}
		if line == 1 {
			// A continued file's chain starts from the previous file's
			// last chain value, named in its header.
			var h struct {
				PrevChain string `json:"prev_chain"`
			}
			if json.Unmarshal(b, &h) == nil && h.PrevChain != "" {
				pb, err := hex.DecodeString(h.PrevChain)
				if err != nil || len(pb) != 32 {
					return l, n, fmt.Errorf("tracklog: line 1: prev_chain is not a SHA-256 in hex: %w", ErrBroken)
				}
				copy(prev[:], pb)
			}
		}
		want := chainHash(prev, b[:i])
		got := b[i+len(chainMarker) : len(b)-2]
		if verify && hex.EncodeToString(want[:]) != string(got) {
			return l, n, fmt.Errorf("tracklog: line %d: chain does not match (the line or one before it was altered, removed or moved): %w", line, ErrBroken)
		}
		copy(prev[:], mustHex(got))
		l.lastChain = prev
		if err := decode(l, b, line); err != nil {
			return l, n, err
		}
		n++
	}
	if n == 0 {
		return l, 0, fmt.Errorf("tracklog: empty log: %w", ErrBroken)
	}
	return l, n, nil
}

func mustHex(s []byte) []byte {
	b := make([]byte, 32)
	hex.Decode(b, s)
	return b
}

func decode(l *Log, b []byte, line int) error {
	var probe struct {
		Format  *string `json:"format"`
		Frame   *int    `json:"frame"`
		Summary bool    `json:"summary"`
	}
	if err := json.Unmarshal(b, &probe); err != nil {
		return fmt.Errorf("tracklog: line %d: %v: %w", line, err, ErrBroken)
	}
	switch {
	case line == 1:
		if probe.Format == nil || *probe.Format != Format {
			return fmt.Errorf("tracklog: line 1: not a %s header: %w", Format, ErrBroken)
		}
		return json.Unmarshal(b, &l.Header)
	case probe.Frame != nil:
		if l.Summary != nil {
			return fmt.Errorf("tracklog: line %d: frame after the summary: %w", line, ErrBroken)
		}
		var r Record
		if err := json.Unmarshal(b, &r); err != nil {
			return fmt.Errorf("tracklog: line %d: %v: %w", line, err, ErrBroken)
		}
		l.Records = append(l.Records, r)
	case probe.Summary:
		var s Summary
		if err := json.Unmarshal(b, &s); err != nil {
			return fmt.Errorf("tracklog: line %d: %v: %w", line, err, ErrBroken)
		}
		l.Summary = &s
	default:
		return fmt.Errorf("tracklog: line %d: neither a frame nor the summary: %w", line, ErrBroken)
	}
	return nil
}
