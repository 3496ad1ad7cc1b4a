package main

import (
	"bufio"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/hewline/hewline/capture/record"
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
// SIGTERM and leaves a complete, verifiable track log and a finished
// recording (its AVI index written: it opens, and holds the frames its
// sidecar lists).
func TestRunSIGTERM(t *testing.T) {
	clip := shortClip(t, 150) // 5 s paced: longer than the test waits
	logPath := filepath.Join(t.TempDir(), "run.ndjson")
	recDir := filepath.Join(t.TempDir(), "rec")
	cmd := exec.Command(binary, "run", "-speaker-stall", "3s", "-source", clip, "-track", logPath, "-record", recDir)
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
	if l.Summary == nil || l.Summary.End != "interrupted" || len(l.Records) < 20 || len(l.Records) >= 150 {
		t.Fatalf("summary %+v with %d records", l.Summary, len(l.Records))
	}
	for _, want := range []string{"not a certified safety function", "speaker:     ok", "fail-safe after 300ms", "stopped (interrupted)"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("output lacks %q:\n%s", want, out.String())
		}
	}
	recClip := filepath.Join(recDir, "rec-0001.avi")
	ts, err := record.ReadSidecar(record.SidecarPath(recClip))
	if err != nil || len(ts) < 20 {
		t.Fatalf("recording's sidecar after SIGTERM: %d frames, %v", len(ts), err)
	}
	// ffprobe (FFmpeg, Debian package ffmpeg), an outside reader, decodes
	// every frame of the recording: it must hold as many as its sidecar
	// lists, none cut short by the stop.
	probe, err := exec.Command("ffprobe", "-v", "error", "-select_streams", "v:0", "-count_frames",
		"-show_entries", "stream=nb_read_frames", "-of", "csv=p=0", recClip).Output()
	if err != nil {
		t.Fatalf("ffprobe %s: %v", recClip, err)
	}
	if n, err := strconv.Atoi(strings.TrimSpace(string(probe))); err != nil || n != len(ts) {
		t.Errorf("ffprobe reads %q frames from the recording, its sidecar lists %d", strings.TrimSpace(string(probe)), len(ts))
	}
}

// TestRecordThenReplayRepeatsDecisions: a live run (on a paced recording of
// the gap scene) records what it saw; replaying that recording gives the
// same per-frame decisions.
func TestRecordThenReplayRepeatsDecisions(t *testing.T) {
	if testing.Short() {
		t.Skip("runs a 6 s live loop")
	}
	sc, err := synth.Lookup("gap")
	if err != nil {
		t.Fatal(err)
	}
	sc.Frames = 180 // includes the first gap: holding, coasting, lost, regaining
	dir := t.TempDir()
	clip := filepath.Join(dir, "gap.avi")
	if err := synth.WriteClip(sc, clip, filepath.Join(dir, "gap.truth.ndjson")); err != nil {
		t.Fatal(err)
	}
	live, recDir := filepath.Join(dir, "live.ndjson"), filepath.Join(dir, "rec")
	cmd := exec.Command(binary, "run", "-speaker-stall", "3s", "-source", clip, "-track", live, "-record", recDir)
	cmd.Env = append(os.Environ(), "ALSA_CONFIG_PATH="+nullALSA(t))
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("run: %v\n%s", err, out)
	}
	replayed := filepath.Join(dir, "replayed.ndjson")
	if code, _, se := runCmd(t, "replay", "-track", replayed, filepath.Join(recDir, "rec-0001.avi")); code != 0 {
		t.Fatalf("replay of the recording: exit %d: %s", code, se)
	}
	read := func(p string) []tracklog.Record {
		f, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		l, err := tracklog.Read(f)
		if err != nil {
			t.Fatal(err)
		}
		return l.Records
	}
	all, b := read(live), read(replayed)
	// Frames the live pipeline dropped before detection are in neither
	// log; frames the recorder dropped (its encoder behind) are in the live
	// log only. The sidecar's src field names the live record of each
	// recorded frame, so the comparison follows it rather than positions.
	_, side, err := record.ReadSidecarFull(record.SidecarPath(filepath.Join(recDir, "rec-0001.avi")))
	if err != nil {
		t.Fatal(err)
	}
	if len(side) != len(b) || len(b) < 100 {
		t.Fatalf("live run logged %d frames, the recording holds %d, the replay logged %d", len(all), len(side), len(b))
	}
	a := make([]tracklog.Record, len(side))
	for i, f := range side {
		if f.Src < 0 || f.Src >= len(all) || (i > 0 && f.Src <= side[i-1].Src) {
			t.Fatalf("sidecar frame %d names live record %d (of %d): out of order or range", i, f.Src, len(all))
		}
		a[i] = all[f.Src]
	}
	pipelineDrops := 0
	for i := 1; i < len(all); i++ {
		pipelineDrops += all[i].Frame - all[i-1].Frame - 1
	}
	t.Logf("source frames dropped before detection: %d; decided frames not recorded: %d", pipelineDrops, len(all)-len(side))
	// The recording is MJPEG, re-encoded from the decoded frames, so its
	// pixels differ slightly from what the live detector saw; the sidecar
	// gives the tracker the same times and repeats its watchdog ticks and
	// faults. Decisions must match except on
	// frames right at a state change (±3 frames), and offsets within 2 px
	// (4 px while coasting).
	states := map[string]bool{}
	near := func(i int) bool {
		for j := max(1, i-3); j <= min(len(a)-1, i+3); j++ {
			if a[j].State != a[j-1].State {
				return true
			}
		}
		return false
	}
	mismatch := 0
	for i := range a {
		states[a[i].State] = true
		if a[i].Tracking != b[i].Tracking || a[i].Alarm != b[i].Alarm || a[i].State != b[i].State {
			mismatch++
			if !near(i) {
				t.Errorf("frame %d: live %s tracking=%v alarm=%v, replay %s tracking=%v alarm=%v (not near a state change)",
					i, a[i].State, a[i].Tracking, a[i].Alarm, b[i].State, b[i].Tracking, b[i].Alarm)
			}
			continue
		}
		// While coasting, the filter extrapolates its rate, which the
		// re-encoded pixels also shift a little, for up to the fail-safe
		// time: 4 px there, 2 px on measured frames.
		tol := 2.0
		if a[i].State == "coasting" {
			tol = 4
		}
		if d := a[i].OffsetPx - b[i].OffsetPx; a[i].Tracking && (d > tol || d < -tol) {
			t.Errorf("frame %d: offset live %.3f replay %.3f", i, a[i].OffsetPx, b[i].OffsetPx)
		}
	}
	if mismatch > len(a)*3/100 {
		t.Errorf("%d of %d frames decided differently", mismatch, len(a))
	}
	t.Logf("%d of %d frames decided differently, all at state changes", mismatch, len(a))
	if !states["lost"] || !states["holding"] {
		t.Errorf("the run never went through a loss (states %v): the test proves little", states)
	}
}

// TestSiteFile: a site file's settings reach the track log, a flag given on
// the command line beats the file, and a broken file is refused with its
// line.
func TestSiteFile(t *testing.T) {
	clip := shortClip(t, 30)
	dir := t.TempDir()
	site := filepath.Join(dir, "site.yaml")
	os.WriteFile(site, []byte("alarm:\n  fail_safe_after: 450ms\n"), 0o644)
	logA, logB := filepath.Join(dir, "a.ndjson"), filepath.Join(dir, "b.ndjson")
	if code, _, se := runCmd(t, "replay", "-site", site, "-track", logA, clip); code != 0 {
		t.Fatalf("replay -site: exit %d: %s", code, se)
	}
	if code, _, se := runCmd(t, "replay", "-site", site, "-failsafe", "200ms", "-track", logB, clip); code != 0 {
		t.Fatalf("replay -site -failsafe: exit %d: %s", code, se)
	}
	for p, want := range map[string]float64{logA: 0.45, logB: 0.2} {
		f, _ := os.Open(p)
		l, err := tracklog.Read(f)
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
		if got := l.Header.Settings["fail_safe_after_s"]; got != want {
			t.Errorf("%s: fail_safe_after_s %v, want %v", filepath.Base(p), got, want)
		}
	}
	bad := filepath.Join(dir, "bad.yaml")
	os.WriteFile(bad, []byte("alarm:\n  fail_safe_aftr: 450ms\n"), 0o644)
	code, _, se := runCmd(t, "replay", "-site", bad, "-track", logA, clip)
	if code == 0 || !strings.Contains(se, bad+":2:") {
		t.Errorf("broken site file: exit %d, stderr %q; want an error naming %s:2", code, se, bad)
	}
}

// TestRunStatusAddressChecks: the status page stays on this computer
// unless asked otherwise, and an address open to the network is refused
// without -status-remote and an access token, with a message saying what
// to do — before any camera, speaker or file is touched.
func TestRunStatusAddressChecks(t *testing.T) {
	dir := t.TempDir()
	short := filepath.Join(dir, "short.token")
	os.WriteFile(short, []byte("abc\n"), 0o600)
	empty := filepath.Join(dir, "empty.token")
	os.WriteFile(empty, []byte("\n"), 0o600)
	tests := map[string]struct {
		args []string
		want string
	}{
		"all interfaces":        {[]string{"-status", "0.0.0.0:8470"}, "is not a loopback address"},
		"host address":          {[]string{"-status", "192.0.2.1:8470"}, "Add -status-remote and an access token"},
		"remote without token":  {[]string{"-status", "0.0.0.0:8470", "-status-remote"}, "-status-remote needs an access token"},
		"remote with short one": {[]string{"-status", "0.0.0.0:8470", "-status-remote", "-status-token-file", short}, "at least 12 characters"},
		"empty token file":      {[]string{"-status", "0.0.0.0:8470", "-status-remote", "-status-token-file", empty}, "is empty"},
		"not an address":        {[]string{"-status", "8470"}, "address"},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			logPath := filepath.Join(t.TempDir(), "t.ndjson")
			args := append([]string{"run", "-source", "does-not-matter.avi", "-track", logPath}, tc.args...)
			cmd := exec.Command(binary, args...)
			cmd.Env = append(os.Environ(), "HEWLINE_STATUS_TOKEN=")
			out, err := cmd.CombinedOutput()
			ee, ok := err.(*exec.ExitError)
			if !ok || ee.ExitCode() != 2 {
				t.Fatalf("exit %v, want 2 (usage); output:\n%s", err, out)
			}
			if !strings.Contains(string(out), tc.want) {
				t.Errorf("output lacks %q:\n%s", tc.want, out)
			}
			if _, err := os.Stat(logPath); err == nil {
				t.Error("a track log was started before the address was refused")
			}
		})
	}
}

// TestRunStatusRemoteWithToken: with -status-remote and a long enough
// token the page binds all interfaces and start-up says it is open to the
// network (the run then stops at the missing source).
func TestRunStatusRemoteWithToken(t *testing.T) {
	dir := t.TempDir()
	tokenFile := filepath.Join(dir, "status.token")
	os.WriteFile(tokenFile, []byte("aisle-c-0123456789\n"), 0o600)
	cmd := exec.Command(binary, "run", "-source", filepath.Join(dir, "missing.avi"), "-track", filepath.Join(dir, "t.ndjson"),
		"-status", "0.0.0.0:0", "-status-remote", "-status-token-file", tokenFile)
	out, err := cmd.CombinedOutput()
	ee, ok := err.(*exec.ExitError)
	if !ok || ee.ExitCode() != 1 {
		t.Fatalf("exit %v, want 1 (the missing source); output:\n%s", err, out)
	}
	if !strings.Contains(string(out), "status page: http://<this computer's address>:") || !strings.Contains(string(out), "every request needs the access token") {
		t.Errorf("start-up does not show the remote page and its token:\n%s", out)
	}
}

// TestRunServesStatus: a live run on a paced recording serves the status
// page on the address it prints, behind the access token it was given:
// /metrics counts the frames, exposes the live drop counter and latency
// histogram, and reports the health of the source and the speaker.
func TestRunServesStatus(t *testing.T) {
	clip := shortClip(t, 120) // 4 s paced; the test needs about one
	dir := t.TempDir()
	tokenFile := filepath.Join(dir, "status.token")
	const token = "warehouse-7-token"
	os.WriteFile(tokenFile, []byte(token+"\n"), 0o600)
	cmd := exec.Command(binary, "run", "-speaker-stall", "3s", "-source", clip, "-track", filepath.Join(dir, "run.ndjson"),
		"-status", "127.0.0.1:0", "-status-token-file", tokenFile)
	cmd.Env = append(os.Environ(), "ALSA_CONFIG_PATH="+nullALSA(t))
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var errOut strings.Builder
	cmd.Stderr = &errOut
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	urls := make(chan string, 1)
	var out strings.Builder
	go func() {
		sc := bufio.NewScanner(stdout)
		sent := false
		for sc.Scan() {
			out.WriteString(sc.Text() + "\n")
			if f := strings.Fields(sc.Text()); !sent && len(f) >= 3 && f[0] == "status" && f[1] == "page:" {
				urls <- f[2]
				sent = true
			}
		}
		close(urls)
	}()
	var base string
	select {
	case base = <-urls:
	case <-time.After(20 * time.Second):
	}
	if !strings.HasPrefix(base, "http://127.0.0.1:") {
		t.Fatalf("no status page address printed (%q); stderr:\n%s", base, errOut.String())
	}
	get := func(path, tok string) (int, string) {
		req, _ := http.NewRequest("GET", base+path, nil)
		if tok != "" {
			req.Header.Set("Authorization", "Bearer "+tok)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatalf("GET %s: %v", path, err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, string(b)
	}
	if code, _ := get("metrics", ""); code != http.StatusUnauthorized {
		t.Errorf("/metrics without the token: %d, want 401", code)
	}
	if code, _ := get("metrics", "wrong-token-0000"); code != http.StatusUnauthorized {
		t.Errorf("/metrics with a wrong token: %d, want 401", code)
	}
	// Wait until a few dozen frames went through, then read the metrics.
	var metrics string
	deadline := time.Now().Add(20 * time.Second)
	for {
		code, body := get("metrics", token)
		if code != http.StatusOK {
			t.Fatalf("/metrics with the token: %d %s", code, body)
		}
		metrics = body
		if v := metricValue(metrics, "hewline_frames_total"); v >= 30 {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("fewer than 30 frames counted in 20 s:\n%s", metrics)
		}
		time.Sleep(100 * time.Millisecond)
	}
	for _, want := range []string{
		"# TYPE hewline_drops_total counter",
		"# TYPE hewline_decision_latency_seconds histogram",
		"hewline_state_seconds_total{state=\"holding\"}",
		"hewline_alarms_total",
		"hewline_health{part=\"source\"} 1",
		"hewline_health{part=\"speaker\"} 1",
	} {
		if !strings.Contains(metrics, want) {
			t.Errorf("/metrics lacks %q:\n%s", want, metrics)
		}
	}
	if n := metricValue(metrics, "hewline_decision_latency_seconds_count"); n < 30 {
		t.Errorf("latency histogram holds %v observations, want every frame (≥ 30)", n)
	}
	cmd.Process.Signal(syscall.SIGTERM)
	if err := cmd.Wait(); err != nil {
		t.Fatalf("run after SIGTERM: %v\n%s", err, errOut.String())
	}
	if !strings.Contains(out.String(), "(this computer only)") {
		t.Errorf("start-up does not say the page is local:\n%s", out.String())
	}
}

// metricValue returns the value of an unlabelled sample, or -1.
func metricValue(text, name string) float64 {
	for _, line := range strings.Split(text, "\n") {
		if v, ok := strings.CutPrefix(line, name+" "); ok {
			f, err := strconv.ParseFloat(v, 64)
			if err == nil {
				return f
			}
		}
	}
	return -1
}
