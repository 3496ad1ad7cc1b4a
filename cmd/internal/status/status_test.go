package status

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/matcheck"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance"
)

func TestMain(m *testing.M) { matcheck.Main(m) }

// fakeClock is a manual clock for deterministic state durations.
type fakeClock struct {
	mu sync.Mutex
	t  time.Time
}

func newFakeClock() *fakeClock { return &fakeClock{t: time.Date(2026, 1, 5, 8, 0, 0, 0, time.UTC)} }

func (c *fakeClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *fakeClock) Add(d time.Duration) {
	c.mu.Lock()
	c.t = c.t.Add(d)
	c.mu.Unlock()
}

// result builds a pipeline result in state st for frame idx.
func result(idx int, st guidance.State, offset float64, at time.Time, latency time.Duration) *pipeline.Result {
	est := guidance.Estimate{State: st, Tracking: st.Trusted(), Alarm: st.Alarmed()}
	if est.Tracking {
		est.OffsetPx, est.Confidence = offset, 0.9
	} else {
		est.Reason = "no trusted measurement for 0.40 s"
	}
	return &pipeline.Result{
		Info:     capture.FrameInfo{Index: idx},
		Est:      est,
		Cue:      guidance.Decide(est),
		Captured: at,
		Decided:  at.Add(latency),
	}
}

func newServer(t *testing.T, opts Options) *Server {
	t.Helper()
	s, err := New(opts)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

func TestNewAddress(t *testing.T) {
	tests := map[string]struct {
		opts    Options
		wantErr string
	}{
		"default":                    {opts: Options{}},
		"ipv4 loopback":              {opts: Options{Addr: "127.0.0.1:0"}},
		"other loopback":             {opts: Options{Addr: "127.0.0.2:0"}},
		"ipv6 loopback":              {opts: Options{Addr: "[::1]:0"}},
		"localhost":                  {opts: Options{Addr: "localhost:0"}},
		"all interfaces":             {opts: Options{Addr: ":8470"}, wantErr: "not loopback"},
		"wildcard":                   {opts: Options{Addr: "0.0.0.0:8470"}, wantErr: "not loopback"},
		"remote, token but no allow": {opts: Options{Addr: "0.0.0.0:8470", Token: "long-enough-token"}, wantErr: "AllowRemote"},
		"remote, allow but no token": {opts: Options{Addr: "192.168.7.20:8470", AllowRemote: true}, wantErr: "token"},
		"remote, short token":        {opts: Options{Addr: "0.0.0.0:8470", AllowRemote: true, Token: "short"}, wantErr: "at least 12"},
		"remote, allowed with token": {opts: Options{Addr: "0.0.0.0:8470", AllowRemote: true, Token: "long-enough-token"}},
		"host name is not loopback":  {opts: Options{Addr: "cart7.local:8470"}, wantErr: "not loopback"},
		"no port":                    {opts: Options{Addr: "127.0.0.1"}, wantErr: "address"},
		"bad quality":                {opts: Options{Quality: 101}, wantErr: "quality"},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			s, err := New(tc.opts)
			if err == nil {
				s.Close()
			}
			switch {
			case tc.wantErr == "" && err != nil:
				t.Fatalf("New: %v", err)
			case tc.wantErr != "" && err == nil:
				t.Fatalf("New accepted %+v; want an error with %q", tc.opts, tc.wantErr)
			case tc.wantErr != "" && !strings.Contains(err.Error(), tc.wantErr):
				t.Fatalf("New error %q; want it to say %q", err, tc.wantErr)
			}
			if strings.Contains(tc.wantErr, "loopback") && !errors.Is(err, ErrRemoteNeedsToken) {
				t.Errorf("error %v is not ErrRemoteNeedsToken", err)
			}
		})
	}
}

func TestToken(t *testing.T) {
	const token = "s3cret-token-for-tests"
	s := newServer(t, Options{Token: token})
	h := s.Handler()
	tests := map[string]struct {
		target string
		header string
		want   int
	}{
		"none":          {target: "/metrics", want: http.StatusUnauthorized},
		"wrong bearer":  {target: "/metrics", header: "Bearer nope", want: http.StatusUnauthorized},
		"prefix only":   {target: "/metrics", header: "Bearer s3cret", want: http.StatusUnauthorized},
		"wrong query":   {target: "/state.json?token=x", want: http.StatusUnauthorized},
		"bearer":        {target: "/metrics", header: "Bearer " + token, want: http.StatusOK},
		"query":         {target: "/state.json?token=" + token, want: http.StatusOK},
		"page by query": {target: "/?token=" + token, want: http.StatusOK},
		"frame 401":     {target: "/frame.jpg", want: http.StatusUnauthorized},
		"unknown path":  {target: "/nothing?token=" + token, want: http.StatusNotFound},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			req := httptest.NewRequest("GET", tc.target, nil)
			if tc.header != "" {
				req.Header.Set("Authorization", tc.header)
			}
			rec := httptest.NewRecorder()
			h.ServeHTTP(rec, req)
			if rec.Code != tc.want {
				t.Fatalf("GET %s (%q): %d; want %d", tc.target, tc.header, rec.Code, tc.want)
			}
		})
	}
}

// feedScript feeds a fixed sequence of states, 100 ms apart on clk, and
// returns the expected seconds per state (each interval counted for the
// state of the frame that started it) and the number of alarm onsets.
func feedScript(t *testing.T, s *Server, clk *fakeClock) (perState map[string]float64, onsets int, n int) {
	t.Helper()
	script := []struct {
		st guidance.State
		n  int
	}{
		{guidance.Seeking, 3}, {guidance.Holding, 10}, {guidance.Coasting, 2},
		{guidance.Lost, 5}, {guidance.Regaining, 2}, {guidance.Holding, 4}, {guidance.Lost, 3},
	}
	perState = map[string]float64{}
	empty := gocv.NewMat()
	defer empty.Close()
	idx := 0
	alarmBefore := false
	for _, seg := range script {
		for i := 0; i < seg.n; i++ {
			lat := 8 * time.Millisecond
			if idx%10 == 9 {
				lat = 200 * time.Millisecond
			}
			if err := s.Frame(result(idx, seg.st, float64(idx), clk.Now(), lat), empty); err != nil {
				t.Fatal(err)
			}
			if seg.st.Alarmed() && !alarmBefore {
				onsets++
			}
			alarmBefore = seg.st.Alarmed()
			clk.Add(100 * time.Millisecond)
			perState[seg.st.String()] += 0.1 // until the next frame, or the scrape
			idx++
		}
	}
	return perState, onsets, idx
}

// parseStrict reads Prometheus text format 0.0.4 line by line and fails on
// anything the format does not allow: every sample's family must have
// been announced by "# TYPE" before it, names and labels must be
// well-formed, values must parse as floats.
// Format: https://prometheus.io/docs/instrumenting/exposition_formats/
func parseStrict(t *testing.T, text string) (samples map[string]float64, types map[string]string) {
	t.Helper()
	samples, types = map[string]float64{}, map[string]string{}
	validName := func(s string) bool {
		for i, r := range s {
			if !(r == '_' || r == ':' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || i > 0 && r >= '0' && r <= '9') {
				return false
			}
		}
		return s != ""
	}
	family := func(name string) string {
		for _, suf := range []string{"_bucket", "_sum", "_count"} {
			if b := strings.TrimSuffix(name, suf); b != name && types[b] == "histogram" {
				return b
			}
		}
		return name
	}
	if !strings.HasSuffix(text, "\n") {
		t.Fatalf("metrics text does not end with a newline")
	}
	for i, line := range strings.Split(strings.TrimSuffix(text, "\n"), "\n") {
		if strings.HasPrefix(line, "# HELP ") {
			continue
		}
		if f, ok := strings.CutPrefix(line, "# TYPE "); ok {
			name, typ, _ := strings.Cut(f, " ")
			if !validName(name) || !map[string]bool{"counter": true, "gauge": true, "histogram": true}[typ] {
				t.Fatalf("line %d: bad TYPE line %q", i+1, line)
			}
			if _, dup := types[name]; dup {
				t.Fatalf("line %d: second TYPE for %s", i+1, name)
			}
			types[name] = typ
			continue
		}
		// We write no timestamps, so the value follows the last space.
		sp := strings.LastIndexByte(line, ' ')
		if sp < 0 {
			t.Fatalf("line %d: no value: %q", i+1, line)
		}
		key, val := line[:sp], line[sp+1:]
		name, labels, hasLabels := strings.Cut(key, "{")
		if !validName(name) {
			t.Fatalf("line %d: bad metric name %q", i+1, name)
		}
		if _, ok := types[family(name)]; !ok {
			t.Fatalf("line %d: sample %s before its TYPE line", i+1, name)
		}
		if hasLabels {
			if err := checkLabels(labels); err != nil {
				t.Fatalf("line %d: %v in %q", i+1, err, line)
			}
		}
		v, err := strconv.ParseFloat(strings.Replace(val, "+Inf", "Inf", 1), 64)
		if err != nil {
			t.Fatalf("line %d: value %q: %v", i+1, val, err)
		}
		if _, dup := samples[key]; dup {
			t.Fatalf("line %d: duplicate sample %s", i+1, key)
		}
		samples[key] = v
	}
	return samples, types
}

// checkLabels checks `a="x",b="y \" z"}`: names, quoting and the only
// escapes allowed (\\, \", \n).
func checkLabels(s string) error {
	for {
		eq := strings.IndexByte(s, '=')
		if eq < 1 || len(s) < eq+2 || s[eq+1] != '"' {
			return fmt.Errorf("bad label at %q", s)
		}
		for i, r := range s[:eq] {
			if !(r == '_' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || i > 0 && r >= '0' && r <= '9') {
				return fmt.Errorf("bad label name %q", s[:eq])
			}
		}
		i := eq + 2
		for ; i < len(s) && s[i] != '"'; i++ {
			if s[i] == '\\' {
				if i+1 >= len(s) || !strings.ContainsRune(`\"n`, rune(s[i+1])) {
					return fmt.Errorf("bad escape in %q", s)
				}
				i++
			}
			if s[i] == '\n' {
				return fmt.Errorf("raw newline in label value")
			}
		}
		if i >= len(s) {
			return fmt.Errorf("unterminated label value in %q", s)
		}
		switch rest := s[i+1:]; {
		case rest == "}":
			return nil
		case strings.HasPrefix(rest, ","):
			s = rest[1:]
		default:
			return fmt.Errorf("want , or } after label value, got %q", rest)
		}
	}
}

func TestMetricsCountWhatWasFed(t *testing.T) {
	clk := newFakeClock()
	s := newServer(t, Options{Now: clk.Now})
	perState, onsets, n := feedScript(t, s, clk)
	empty := gocv.NewMat()
	defer empty.Close()
	// The watchdog's result carries the pipeline's drop count so far (6);
	// SetDrops with less changes nothing: a counter never goes down.
	s.Frame(&pipeline.Result{Info: capture.FrameInfo{Index: n - 1}, Tick: true, Drops: 6,
		Est: guidance.Estimate{State: guidance.Lost, Alarm: true, Reason: "camera stalled"}}, empty)
	clk.Add(250 * time.Millisecond)
	perState["lost"] += 0.25
	s.SetDrops(4)
	s.SetDrops(2)
	s.SetSourceDrops(9)
	s.SetSourceDrops(3)
	s.SetHealth("camera", true, "/dev/video0 30 fps")
	s.SetHealth(`speaker "left"`, false, "no sound card")

	var buf bytes.Buffer
	if err := s.WriteMetrics(&buf); err != nil {
		t.Fatal(err)
	}
	samples, types := parseStrict(t, buf.String())
	want := map[string]float64{
		"hewline_frames_total":                               float64(n),
		"hewline_ticks_total":                                1,
		"hewline_drops_total":                                6,
		"hewline_source_drops_total":                         9,
		"hewline_frames_skipped_total":                       0,
		"hewline_alarms_total":                               float64(onsets),
		"hewline_alarm":                                      1,
		"hewline_tracking":                                   0,
		`hewline_state{state="lost"}`:                        1,
		`hewline_state{state="holding"}`:                     0,
		`hewline_health{part="camera"}`:                      1,
		`hewline_health{part="speaker \"left\""}`:            0,
		`hewline_decision_latency_seconds_count`:             float64(n),
		`hewline_decision_latency_seconds_bucket{le="0.01"}`: float64(n - n/10),
		`hewline_decision_latency_seconds_bucket{le="0.15"}`: float64(n - n/10),
		`hewline_decision_latency_seconds_bucket{le="0.25"}`: float64(n),
		`hewline_decision_latency_seconds_bucket{le="+Inf"}`: float64(n),
		"hewline_last_result_age_seconds":                    0.25,
	}
	for st, sec := range perState {
		want[`hewline_state_seconds_total{state="`+st+`"}`] = sec
	}
	for k, v := range want {
		got, ok := samples[k]
		if !ok {
			t.Errorf("missing sample %s in\n%s", k, buf.String())
			continue
		}
		if math.Abs(got-v) > 1e-9 {
			t.Errorf("%s = %g; want %g", k, got, v)
		}
	}
	if onsets != 2 {
		t.Fatalf("script has %d alarm onsets; the test expects 2", onsets)
	}
	wantSum := float64(n-n/10)*0.008 + float64(n/10)*0.2
	if got := samples["hewline_decision_latency_seconds_sum"]; math.Abs(got-wantSum) > 1e-9 {
		t.Errorf("latency sum %g; want %g", got, wantSum)
	}
	for name, typ := range map[string]string{"hewline_frames_total": "counter", "hewline_alarm": "gauge",
		"hewline_decision_latency_seconds": "histogram", "hewline_state_seconds_total": "counter"} {
		if types[name] != typ {
			t.Errorf("TYPE of %s is %q; want %q", name, types[name], typ)
		}
	}

	// Outside check: the prometheus_client library's own text parser
	// (Debian python3-prometheus-client) must read the same samples.
	ref := referenceParse(t, buf.Bytes())
	if ref == nil {
		return
	}
	for k, v := range samples {
		rk := refKey(k)
		rv, ok := ref[rk]
		if !ok {
			t.Errorf("reference parser lacks %s (as %s); it read %v", k, rk, ref)
			continue
		}
		if !(rv == v || math.IsInf(rv, 1) && math.IsInf(v, 1) || math.Abs(rv-v) < 1e-9) {
			t.Errorf("reference parser reads %s = %g; ours %g", k, rv, v)
		}
	}
	if len(ref) != len(samples) {
		t.Errorf("reference parser reads %d samples; ours %d", len(ref), len(samples))
	}
}

// refKey turns name{a="x",b="y"} into the script's name{a=x,b=y} form.
func refKey(k string) string {
	name, labels, ok := strings.Cut(k, "{")
	if !ok {
		return k
	}
	var parts []string
	for _, kv := range strings.Split(strings.TrimSuffix(labels, "}"), ",") {
		key, v, _ := strings.Cut(kv, "=")
		v = strings.TrimSuffix(strings.TrimPrefix(v, `"`), `"`)
		v = strings.NewReplacer(`\"`, `"`, `\\`, `\`, `\n`, "\n").Replace(v)
		parts = append(parts, key+"="+v)
	}
	return name + "{" + strings.Join(parts, ",") + "}"
}

// needTool skips, loudly, when a tool the setup script installs is absent;
// under CI (CI=true) it fails instead.
func needTool(t *testing.T, what string) {
	t.Helper()
	msg := fmt.Sprintf("%s is not installed: scripts/setup.sh installs it; THIS CHECK DID NOT RUN", what)
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip("SKIP: " + msg)
}

// debianPython is Debian's interpreter, which sees the python3-* packages
// (a python3 earlier in PATH, e.g. from pyenv, may not).
func debianPython() string {
	if _, err := os.Stat("/usr/bin/python3"); err == nil {
		return "/usr/bin/python3"
	}
	return "python3"
}

func referenceParse(t *testing.T, text []byte) map[string]float64 {
	t.Helper()
	py := debianPython()
	if exec.Command(py, "-c", "import prometheus_client").Run() != nil {
		needTool(t, "python3 with prometheus_client (Debian python3-prometheus-client)")
		return nil
	}
	cmd := exec.Command(py, "testdata/parse_metrics.py")
	cmd.Stdin = bytes.NewReader(text)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("reference parser rejects our metrics: %v\n%s\n%s", err, stderr.String(), text)
	}
	var got struct {
		Samples map[string]string `json:"samples"` // Python's repr, e.g. "inf"
	}
	if err := json.Unmarshal(out, &got); err != nil {
		t.Fatalf("reference parser output: %v\n%s", err, out)
	}
	ref := map[string]float64{}
	for k, v := range got.Samples {
		f, err := strconv.ParseFloat(v, 64)
		if err != nil {
			t.Fatalf("reference parser value %s = %q: %v", k, v, err)
		}
		ref[k] = f
	}
	return ref
}
