package tracklog_test

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/hewline/hewline/guidance/tracklog"
)

// writeRotated writes n records at 30 fps through a RotatingWriter and
// returns the files.
func writeRotated(t *testing.T, dir string, n int, rot tracklog.Rotation) []string {
	t.Helper()
	w, err := tracklog.NewRotatingWriter(filepath.Join(dir, "shift.track.ndjson"),
		tracklog.Header{Tool: "test", Source: "cam", Width: 640, Height: 480, FPS: 30}, rot)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < n; i++ {
		r := tracklog.Record{Frame: i, T: float64(i) / 30, Tracking: i%20 < 15, Alarm: i%20 >= 17,
			Confidence: 0.8, State: "holding", Method: "classical"}
		if err := w.Write(&r); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close("eof", nil); err != nil {
		t.Fatal(err)
	}
	return append([]string(nil), w.Files()...)
}

func TestPartName(t *testing.T) {
	for name, tc := range map[string]struct {
		base string
		n    int
		want string
	}{
		"first":     {"a/shift.track.ndjson", 1, "a/shift.track.ndjson"},
		"second":    {"a/shift.track.ndjson", 2, "a/shift.track-0002.ndjson"},
		"other ext": {"log.txt", 3, "log.txt-0003"},
	} {
		if got := tracklog.PartName(tc.base, tc.n); got != tc.want {
			t.Errorf("%s: %q, want %q", name, got, tc.want)
		}
	}
}

func TestRotationBySpanAndSize(t *testing.T) {
	// 100 frames at 30 fps with a 1 s span: files start at frames 0, 30,
	// 60, 90.
	files := writeRotated(t, t.TempDir(), 100, tracklog.Rotation{MaxSpan: time.Second})
	if len(files) != 4 {
		t.Fatalf("span rotation made %d files, want 4: %v", len(files), files)
	}
	l, err := tracklog.ReadSet(files)
	if err != nil {
		t.Fatal(err)
	}
	if len(l.Records) != 100 || l.Summary == nil || l.Summary.Frames != 100 || l.Summary.End != "eof" {
		t.Fatalf("set read back %d records, summary %+v", len(l.Records), l.Summary)
	}
	for i, r := range l.Records {
		if r.Frame != i {
			t.Fatalf("record %d has frame %d", i, r.Frame)
		}
	}
	// Each file verifies on its own too, its chain seeded by prev_chain.
	for i, p := range files {
		f, _ := os.Open(p)
		one, err := tracklog.Read(f)
		f.Close()
		if err != nil {
			t.Fatalf("%s alone: %v", p, err)
		}
		if i > 0 && (one.Header.Part != i+1 || one.Header.PrevFile != filepath.Base(files[i-1])) {
			t.Errorf("%s header %+v", p, one.Header)
		}
		if i < len(files)-1 && (one.Summary.End != "rotated" || one.Summary.Next != filepath.Base(files[i+1])) {
			t.Errorf("%s summary %+v", p, one.Summary)
		}
	}
	// Size: every file but the last is at least the limit, and not much
	// more than the limit plus one record.
	const limit = 4000
	files = writeRotated(t, t.TempDir(), 100, tracklog.Rotation{MaxBytes: limit})
	if len(files) < 3 {
		t.Fatalf("size rotation made %d files", len(files))
	}
	for _, p := range files[:len(files)-1] {
		st, _ := os.Stat(p)
		if st.Size() < limit || st.Size() > limit+1000 {
			t.Errorf("%s is %d bytes, limit %d", p, st.Size(), limit)
		}
	}
	if _, err := tracklog.VerifySet(files); err != nil {
		t.Fatal(err)
	}
}

func TestVerifySetFindsMissingAlteredAndReordered(t *testing.T) {
	dir := t.TempDir()
	files := writeRotated(t, dir, 100, tracklog.Rotation{MaxSpan: time.Second})
	// Altered: one byte of file 2 changes (frame 40 is its line 12).
	alt := t.TempDir()
	var altFiles []string
	for i, p := range files {
		b, _ := os.ReadFile(p)
		if i == 1 {
			b = []byte(strings.Replace(string(b), `"frame":40,`, `"frame":41,`, 1))
		}
		q := filepath.Join(alt, filepath.Base(p))
		os.WriteFile(q, b, 0o644)
		altFiles = append(altFiles, q)
	}
	cases := map[string]struct {
		paths []string
		file  string
		text  string
	}{
		"missing middle": {[]string{files[0], files[1], files[3]}, files[1], "missing"},
		"missing first":  {files[1:], files[1], "starts earlier"},
		"missing last":   {files[:3], files[2], "continues in"},
		"reordered":      {[]string{files[0], files[2], files[1], files[3]}, files[0], "out of order"},
		"altered":        {altFiles, altFiles[1], "line 12:"},
	}
	for name, tc := range cases {
		t.Run(name, func(t *testing.T) {
			_, err := tracklog.VerifySet(tc.paths)
			var se *tracklog.SetError
			if !errors.Is(err, tracklog.ErrBroken) || !errors.As(err, &se) || se.File != tc.file || !strings.Contains(err.Error(), tc.text) {
				t.Fatalf("VerifySet: %v, want ErrBroken at %s saying %q", err, tc.file, tc.text)
			}
		})
	}
}

func TestVerifySetSingleLog(t *testing.T) {
	p := filepath.Join(t.TempDir(), "one.ndjson")
	os.WriteFile(p, sample(t), 0o644)
	if n, err := tracklog.VerifySet([]string{p}); err != nil || n != 7 {
		t.Fatalf("single log: %d lines, %v", n, err)
	}
}

func TestGroupSets(t *testing.T) {
	dir := t.TempDir()
	files := writeRotated(t, dir, 100, tracklog.Rotation{MaxSpan: time.Second})
	other := filepath.Join(dir, "other.ndjson")
	os.WriteFile(other, sample(t), 0o644)
	// Glob order: "-0002" sorts before ".ndjson".
	in := []string{files[1], files[2], files[3], other, files[0]}
	got := tracklog.GroupSets(in)
	want := [][]string{{other}, files}
	if len(got) != 2 || strings.Join(got[0], ",") != strings.Join(want[0], ",") || strings.Join(got[1], ",") != strings.Join(want[1], ",") {
		t.Fatalf("GroupSets = %v, want %v", got, want)
	}
	// A missing middle file splits the set; the first part then fails.
	got = tracklog.GroupSets([]string{files[0], files[1], files[3]})
	if len(got) != 2 || len(got[0]) != 2 || got[1][0] != files[3] {
		t.Fatalf("with a gap: %v", got)
	}
	if _, err := tracklog.VerifySet(got[0]); err == nil {
		t.Error("the part before the gap verified as complete")
	}
}
