package main

import (
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"github.com/hewline/hewline/capture/matcheck"
	"github.com/hewline/hewline/capture/synth"
)

var binary string // the hewline command built for these tests

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "hewline-cmd-test")
	if err != nil {
		panic(err)
	}
	binary = filepath.Join(dir, "hewline")
	if out, err := exec.Command("go", "build", "-tags", "matprofile", "-o", binary, ".").CombinedOutput(); err != nil {
		os.Stderr.Write(out)
		panic(err)
	}
	defer os.RemoveAll(dir)
	matcheck.Main(m)
}

// runCmd runs the built command and returns its exit code and output.
func runCmd(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	cmd := exec.Command(binary, args...)
	var so, se strings.Builder
	cmd.Stdout, cmd.Stderr = &so, &se
	err := cmd.Run()
	var ee *exec.ExitError
	switch {
	case err == nil:
		return 0, so.String(), se.String()
	case errors.As(err, &ee):
		if ws, ok := ee.Sys().(syscall.WaitStatus); ok && ws.Signaled() {
			t.Fatalf("hewline %s died of signal %v (SIGABRT is OpenCV aborting): %s", strings.Join(args, " "), ws.Signal(), se.String())
		}
		return ee.ExitCode(), so.String(), se.String()
	}
	t.Fatalf("run hewline: %v", err)
	return
}

// badFiles makes a missing, a zero-byte, a non-video and a truncated file.
func badFiles(t *testing.T) map[string]string {
	t.Helper()
	dir := t.TempDir()
	sc, err := synth.Lookup("weave")
	if err != nil {
		t.Fatal(err)
	}
	sc.Frames = 40
	clip := filepath.Join(dir, "good.avi")
	if err := synth.WriteClip(sc, clip, filepath.Join(dir, "good.truth.ndjson")); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(clip)
	if err != nil {
		t.Fatal(err)
	}
	files := map[string]string{
		"missing":   filepath.Join(dir, "missing.avi"),
		"zero-byte": filepath.Join(dir, "zero.avi"),
		"not video": filepath.Join(dir, "text.avi"),
		"truncated": filepath.Join(dir, "cut.avi"),
		"good":      clip,
	}
	os.WriteFile(files["zero-byte"], nil, 0o644)
	os.WriteFile(files["not video"], []byte("aisle C stripe notes\n"), 0o644)
	os.WriteFile(files["truncated"], data[:len(data)/2], 0o644)
	return files
}

// TestBadFiles: every command that reads a file exits non-zero on a bad
// one, with a one-line message naming it, and never dies of a signal.
func TestBadFiles(t *testing.T) {
	files := badFiles(t)
	out := t.TempDir()
	commands := map[string][]string{
		"replay":       {"replay", "-out", out, "FILE"},
		"replay calib": {"replay", "-out", out, "-calib", "FILE", files["good"]},
		"run":          {"run", "-speaker=false", "-require-alarm=false", "-track", filepath.Join(out, "run.ndjson"), "-source", "FILE"},
		"verify":       {"verify", "FILE"},
		"report":       {"report", "-o", filepath.Join(out, "r.html"), "FILE"},
		"compare":      {"compare", "FILE", "FILE"},
		"misses":       {"misses", "FILE", "FILE"},
		"calib lens":   {"calib", "lens", "-o", filepath.Join(out, "c.json"), "FILE"},
		"calib floor":  {"calib", "floor", "-calib", "FILE", "-height", "500", "-pitch", "30"},
		"train site":   {"train", "-o", filepath.Join(out, "m.onnx"), "-epochs", "1", "-frames", "8", "-site", "FILE"},
	}
	for cname, args := range commands {
		for fname, path := range files {
			if fname == "good" {
				continue
			}
			t.Run(cname+"/"+fname, func(t *testing.T) {
				a := make([]string, len(args))
				for i, s := range args {
					a[i] = strings.ReplaceAll(s, "FILE", path)
				}
				code, stdout, stderr := runCmd(t, a...)
				if code == 0 {
					t.Fatalf("exit 0 on a %s file; stdout %q", fname, stdout)
				}
				var own []string // our lines, not the decoder library's chatter
				for _, l := range strings.Split(strings.TrimSpace(stderr+stdout), "\n") {
					if strings.HasPrefix(l, "hewline ") || strings.Contains(l, "FAILED") {
						own = append(own, l)
					}
				}
				if len(own) != 1 || !strings.Contains(own[0], path) {
					t.Errorf("want one message line naming %s, got %q (stderr %q)", path, own, stderr)
				}
			})
		}
	}
}

func TestUsage(t *testing.T) {
	for name, tc := range map[string]struct {
		args []string
		code int
	}{
		"no command":      {nil, 2},
		"unknown command": {[]string{"fly"}, 2},
		"help":            {[]string{"help"}, 0},
		"replay no clip":  {[]string{"replay"}, 2},
		"replay -h":       {[]string{"replay", "-h"}, 0},
		"demo -h":         {[]string{"demo", "-h"}, 0},
		"verify -h":       {[]string{"verify", "-h"}, 0},
		"bad flag":        {[]string{"replay", "-nope", "x"}, 2},
	} {
		t.Run(name, func(t *testing.T) {
			if code, _, se := runCmd(t, tc.args...); code != tc.code {
				t.Errorf("exit %d, want %d; stderr %q", code, tc.code, se)
			}
		})
	}
}

// TestDemo runs the demo on one short scene and checks that its files are
// there and that the log verifies; the accuracy itself is checked against
// the renderer's truth in the detection tests.
func TestDemo(t *testing.T) {
	out := t.TempDir()
	code, stdout, stderr := runCmd(t, "demo", "-out", out, "-scenario", "weave")
	if code != 0 {
		t.Fatalf("demo exit %d: %s", code, stderr)
	}
	for _, f := range []string{"weave.avi", "weave.truth.ndjson", "weave.track.ndjson", "weave.annotated.avi", "summary.md"} {
		if st, err := os.Stat(filepath.Join(out, f)); err != nil || st.Size() == 0 {
			t.Errorf("%s missing or empty: %v", f, err)
		}
	}
	if !strings.Contains(stdout, "not a certified safety function") {
		t.Error("demo does not show the safety caution")
	}
	if code, so, se := runCmd(t, "verify", filepath.Join(out, "weave.track.ndjson")); code != 0 {
		t.Errorf("verify the demo's log: exit %d: %s %s", code, so, se)
	}
}
