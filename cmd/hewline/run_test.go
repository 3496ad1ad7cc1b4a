package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/guidance/tracklog"
)

// nullALSA writes an ALSA configuration whose default device is ALSA's
// null plugin: a working sound device that discards what it plays.
func nullALSA(t *testing.T) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "asound.conf")
	if err := os.WriteFile(p, []byte("pcm.!default { type null }\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func shortClip(t *testing.T, frames int) string {
	t.Helper()
	sc, err := synth.Lookup("weave")
	if err != nil {
		t.Fatal(err)
	}
	sc.Frames = frames
	dir := t.TempDir()
	clip := filepath.Join(dir, "weave.avi")
	if err := synth.WriteClip(sc, clip, filepath.Join(dir, "weave.truth.ndjson")); err != nil {
		t.Fatal(err)
	}
	return clip
}

func TestRunNoAlarmChannelExits3(t *testing.T) {
	clip := shortClip(t, 10)
	cmd := exec.Command(binary, "run", "-source", clip, "-track", filepath.Join(t.TempDir(), "t.ndjson"))
	// An ALSA configuration with no devices at all: the speaker cannot open.
	empty := filepath.Join(t.TempDir(), "empty.conf")
	os.WriteFile(empty, []byte("\n"), 0o644)
	cmd.Env = append(os.Environ(), "ALSA_CONFIG_PATH="+empty)
	out, err := cmd.CombinedOutput()
	ee, ok := err.(*exec.ExitError)
	if !ok || ee.ExitCode() != 3 {
		t.Fatalf("exit %v, want 3 (no alarm channel); output:\n%s", err, out)
	}
	if !strings.Contains(string(out), "no alarm channel") {
		t.Errorf("output does not say why:\n%s", out)
	}
}

// TestRunSIGTERM: the live loop on a paced recording is stopped with
// SIGTERM and leaves a complete, verifiable track log.
func TestRunSIGTERM(t *testing.T) {
	clip := shortClip(t, 300) // 10 s paced: longer than the test waits
	logPath := filepath.Join(t.TempDir(), "run.ndjson")
	cmd := exec.Command(binary, "run", "-source", clip, "-track", logPath)
	cmd.Env = append(os.Environ(), "ALSA_CONFIG_PATH="+nullALSA(t))
	var out strings.Builder
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Wait until frames are being logged, then stop it.
	deadline := time.Now().Add(20 * time.Second)
	for {
		b, _ := os.ReadFile(logPath)
		if strings.Count(string(b), "\n") > 20 {
			break
		}
		if time.Now().After(deadline) {
			cmd.Process.Kill()
			t.Fatalf("no frames logged:\n%s", out.String())
		}
		time.Sleep(50 * time.Millisecond)
	}
	cmd.Process.Signal(syscall.SIGTERM)
	err := cmd.Wait()
	if err != nil {
		t.Fatalf("run after SIGTERM: %v\n%s", err, out.String())
	}
	f, err := os.Open(logPath)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	l, err := tracklog.Read(f)
	if err != nil {
		t.Fatalf("log after SIGTERM: %v", err)
	}
	if l.Summary == nil || l.Summary.End != "interrupted" || len(l.Records) < 20 || len(l.Records) >= 300 {
		t.Fatalf("summary %+v with %d records", l.Summary, len(l.Records))
	}
	for _, want := range []string{"not a certified safety function", "speaker:     ok", "fail-safe after 300ms", "stopped (interrupted)"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("output lacks %q:\n%s", want, out.String())
		}
	}
}
