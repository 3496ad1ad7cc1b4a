package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestReportAndCompare runs report and compare on real replay logs.
func TestReportAndCompare(t *testing.T) {
	if testing.Short() {
		t.Skip("replays a clip")
	}
	clip := shortClip(t, 90)
	dir := t.TempDir()
	a, b, c := filepath.Join(dir, "a.ndjson"), filepath.Join(dir, "b.ndjson"), filepath.Join(dir, "c.ndjson")
	for _, tc := range [][]string{
		{"replay", "-track", a, clip},
		{"replay", "-track", b, clip},
		{"replay", "-failsafe", "100ms", "-reacquire", "1s", "-track", c, clip},
	} {
		if code, _, se := runCmd(t, tc...); code != 0 {
			t.Fatalf("%v: exit %d: %s", tc, code, se)
		}
	}
	html := filepath.Join(dir, "r.html")
	if code, so, se := runCmd(t, "report", "-o", html, a); code != 0 {
		t.Fatalf("report: exit %d: %s %s", code, so, se)
	}
	if st, err := os.Stat(html); err != nil || st.Size() < 1000 {
		t.Fatalf("report HTML missing or tiny: %v", err)
	}
	if code, so, se := runCmd(t, "compare", a, b); code != 0 {
		t.Errorf("compare of two identical replays: exit %d: %s %s", code, so, se)
	}
	// A 1 s reacquire time keeps the tracker untrusted for the first second:
	// the runs must disagree there.
	if code, so, _ := runCmd(t, "compare", a, c); code != 1 {
		t.Errorf("compare of different settings: exit %d, want 1: %s", code, so)
	}
	// A tampered log is refused by report, naming the file.
	data, _ := os.ReadFile(a)
	bad := filepath.Join(dir, "bad.ndjson")
	os.WriteFile(bad, []byte(strings.Replace(string(data), `"alarm":false`, `"alarm":true`, 1)), 0o644)
	if code, _, se := runCmd(t, "report", "-o", filepath.Join(dir, "bad.html"), bad); code != 1 || !strings.Contains(se, bad) {
		t.Errorf("report of a tampered log: exit %d: %s", code, se)
	}
}
