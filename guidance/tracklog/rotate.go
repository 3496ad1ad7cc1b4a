package tracklog

import (
	"bufio"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"
)

// Rotation says when a RotatingWriter starts a new file. A zero field
// never triggers.
type Rotation struct {
	// MaxBytes starts a new file before a record once the current file
	// holds at least this many bytes.
	MaxBytes int64
	// MaxSpan starts a new file before a record whose time t lies MaxSpan
	// or more after the first record of the current file (log time, not
	// wall time, so that replays rotate the same way every run).
	MaxSpan time.Duration
}

// PartName returns the name of part n (1-based) of the rotated log whose
// first file is base: base itself for part 1, then base with "-0002",
// "-0003"… before its ".ndjson" extension.
func PartName(base string, n int) string {
	if n <= 1 {
		return base
	}
	ext := filepath.Ext(base)
	if ext != ".ndjson" {
		return fmt.Sprintf("%s-%04d", base, n)
	}
	return fmt.Sprintf("%s-%04d%s", strings.TrimSuffix(base, ext), n, ext)
}

// RotatingWriter writes a track log across several files. Each file but
// the last ends with a summary whose End is "rotated" and whose Next names
// the following file; each file after the first has a header naming the
// file before (PrevFile), its last chain value (PrevChain) and its Part,
// and its chain continues from that value, so VerifySet finds a missing,
// altered or reordered file. Summary counts are for the whole run so far.
// It is not safe for concurrent use.
type RotatingWriter struct {
	base   string
	hdr    Header
	rot    Rotation
	f      *os.File
	w      *Writer
	part   int
	files  []string
	startT float64 // t of the current file's first record
	nrec   int     // records in the current file
	closed bool
}

// NewRotatingWriter creates the first file at base (truncating it) and
// writes its header.
func NewRotatingWriter(base string, h Header, rot Rotation) (*RotatingWriter, error) {
	rw := &RotatingWriter{base: base, hdr: h, rot: rot}
	if err := rw.open(1, [32]byte{}, nil); err != nil {
		return nil, err
	}
	return rw, nil
}

func (rw *RotatingWriter) open(part int, prev [32]byte, sum *Summary) error {
	name := PartName(rw.base, part)
	f, err := os.Create(name)
	if err != nil {
		return fmt.Errorf("tracklog: %w", err)
	}
	h := rw.hdr
	h.Part, h.PrevFile, h.PrevChain = 0, "", ""
	if part > 1 {
		h.Part = part
		h.PrevFile = filepath.Base(PartName(rw.base, part-1))
		h.PrevChain = hex.EncodeToString(prev[:])
	}
	w, err := newWriter(f, h, prev)
	if err != nil {
		f.Close()
		return fmt.Errorf("tracklog: %s: %w", name, err)
	}
	if sum != nil {
		w.sum = *sum
		w.prevAlarm = rw.w.prevAlarm
	}
	rw.f, rw.w, rw.part, rw.nrec = f, w, part, 0
	rw.files = append(rw.files, name)
	return nil
}

// due reports whether the record at time t belongs in a new file.
func (rw *RotatingWriter) due(t float64) bool {
	if rw.nrec == 0 {
		return false
	}
	if rw.rot.MaxBytes > 0 && rw.w.cw.n >= rw.rot.MaxBytes {
		return true
	}
	return rw.rot.MaxSpan > 0 && t-rw.startT >= rw.rot.MaxSpan.Seconds()
}

// Write appends one frame record, first starting a new file when the
// rotation rule says so. The record is not retained.
func (rw *RotatingWriter) Write(r *Record) error {
	if rw.closed {
		return errors.New("tracklog: write after close")
	}
	if rw.due(r.T) {
		if err := rw.rotate(); err != nil {
			return err
		}
	}
	if rw.nrec == 0 {
		rw.startT = r.T
	}
	if err := rw.w.Write(r); err != nil {
		return fmt.Errorf("%s: %w", rw.f.Name(), err)
	}
	rw.nrec++
	return nil
}

func (rw *RotatingWriter) rotate() error {
	next := PartName(rw.base, rw.part+1)
	old := rw.w
	old.sum.Next = filepath.Base(next)
	if err := old.Close("rotated", nil); err != nil {
		return fmt.Errorf("%s: %w", rw.f.Name(), err)
	}
	sum := old.sum
	sum.End, sum.Next = "", ""
	if err := rw.f.Close(); err != nil {
		return fmt.Errorf("tracklog: %w", err)
	}
	return rw.open(rw.part+1, old.cw.prev, &sum)
}

// Summary returns the summary counted so far over all files.
func (rw *RotatingWriter) Summary() Summary { return rw.w.Summary() }

// Files returns the paths written so far, in order. The caller must not
// modify the slice.
func (rw *RotatingWriter) Files() []string { return rw.files }

// Close writes the summary line to the current file and closes it.
func (rw *RotatingWriter) Close(end string, extra map[string]float64) error {
	if rw.closed {
		return nil
	}
	rw.closed = true
	err := rw.w.Close(end, extra)
	if cerr := rw.f.Close(); err == nil && cerr != nil {
		err = fmt.Errorf("tracklog: %w", cerr)
	}
	return err
}

// SetError is the error VerifySet and ReadSet return: which file failed
// and why. It wraps ErrBroken.
type SetError struct {
	File string // the path at fault, or the one after a missing file
	Err  error
}

func (e *SetError) Error() string { return e.File + ": " + e.Err.Error() }
func (e *SetError) Unwrap() error { return e.Err }

// VerifySet checks that paths, in the order given, are the complete files
// of one rotated log, each intact: every chain verifies, each file
// continues from the one before (name and chain), the first file is part
// 1 and the last ends with a summary that is not "rotated". It returns the
// number of lines that verified before the first failure. A single
// unrotated log passes too.
func VerifySet(paths []string) (int, error) {
	_, n, err := readSet(paths)
	return n, err
}

// ReadSet reads and verifies a rotated log (see VerifySet) and returns it
// as one Log: the first file's header, all records in order, and the last
// file's summary. On error it returns what was read before the failure.
func ReadSet(paths []string) (*Log, error) {
	l, _, err := readSet(paths)
	return l, err
}

func readSet(paths []string) (*Log, int, error) {
	all := &Log{}
	total := 0
	if len(paths) == 0 {
		return all, 0, &SetError{File: "(none)", Err: fmt.Errorf("tracklog: no files: %w", ErrBroken)}
	}
	fail := func(p, format string, a ...any) (*Log, int, error) {
		return all, total, &SetError{File: p, Err: fmt.Errorf("tracklog: "+format+": %w", append(a, ErrBroken)...)}
	}
	var prevChain string
	for i, p := range paths {
		f, err := os.Open(p)
		if err != nil {
			return all, total, &SetError{File: p, Err: err}
		}
		l, n, err := read(f, true)
		f.Close()
		if i == 0 {
			all.Header = l.Header
		}
		all.Records = append(all.Records, l.Records...)
		total += n
		if err != nil {
			return all, total, &SetError{File: p, Err: err}
		}
		h := l.Header
		switch {
		case i == 0 && h.PrevFile != "":
			return fail(p, "part %d: the log starts earlier, in %s, which is not given", h.Part, h.PrevFile)
		case i > 0 && h.PrevFile != filepath.Base(paths[i-1]):
			if h.PrevFile == "" {
				return fail(p, "not a continuation of %s (a separate log)", paths[i-1])
			}
			return fail(p, "part %d continues %s, not %s: a file is missing or out of order", h.Part, h.PrevFile, filepath.Base(paths[i-1]))
		case i > 0 && h.PrevChain != prevChain:
			return fail(p, "prev_chain does not match the last chain of %s (that file was altered or cut short)", paths[i-1])
		}
		last := i == len(paths)-1
		switch {
		case l.Summary == nil:
			return fail(p, "no summary line: the run ended without closing the log")
		case !last && l.Summary.End != "rotated":
			return fail(p, "ends with %q, yet more files follow", l.Summary.End)
		case !last && l.Summary.Next != filepath.Base(paths[i+1]):
			return fail(p, "continues in %s, not %s: a file is missing or out of order", l.Summary.Next, filepath.Base(paths[i+1]))
		case last && l.Summary.End == "rotated":
			return fail(p, "the log continues in %s, which is not given", l.Summary.Next)
		}
		all.Summary = l.Summary
		prevChain = hex.EncodeToString(l.lastChain[:])
	}
	return all, total, nil
}

// GroupSets sorts paths into logs: each file whose header names another
// given file as its PrevFile follows that file, whatever order the paths
// came in (a shell glob puts "shift.track-0002.ndjson" before
// "shift.track.ndjson"). A file that starts a log, or whose previous file
// is not given, begins a group; groups keep the order in which their
// first files were given. A file that cannot be read stands alone (it
// fails when read). Pass each group to ReadSet or VerifySet.
func GroupSets(paths []string) [][]string {
	prev := make([]string, len(paths))
	byBase := map[string]int{}
	for i, p := range paths {
		prev[i] = prevFileOf(p)
		if _, dup := byBase[filepath.Base(p)]; !dup {
			byBase[filepath.Base(p)] = i
		}
	}
	next := map[int]int{}
	isHead := make([]bool, len(paths))
	for i := range paths {
		j, ok := byBase[prev[i]]
		if _, taken := next[j]; prev[i] == "" || !ok || j == i || taken {
			isHead[i] = true
			continue
		}
		next[j] = i
	}
	used := make([]bool, len(paths))
	var sets [][]string
	for i := range paths {
		if !isHead[i] {
			continue
		}
		var g []string
		for k, ok := i, true; ok && !used[k]; k, ok = next[k] {
			used[k] = true
			g = append(g, paths[k])
		}
		sets = append(sets, g)
	}
	for i, p := range paths { // left in a cycle: each alone
		if !used[i] {
			sets = append(sets, []string{p})
		}
	}
	return sets
}

// prevFileOf returns the PrevFile of p's header, or "".
func prevFileOf(p string) string {
	f, err := os.Open(p)
	if err != nil {
		return ""
	}
	defer f.Close()
	line, err := bufio.NewReaderSize(f, 1<<16).ReadBytes('\n')
	if err != nil {
		return ""
	}
	var h struct {
		PrevFile string `json:"prev_file"`
	}
	if json.Unmarshal(line, &h) != nil {
		return ""
	}
	return h.PrevFile
}
