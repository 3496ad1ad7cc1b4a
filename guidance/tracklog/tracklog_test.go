package tracklog_test

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"strings"
	"testing"

	"github.com/hewline/hewline/guidance/tracklog"
)

func sample(t *testing.T) []byte {
	t.Helper()
	var buf bytes.Buffer
	w, err := tracklog.NewWriter(&buf, tracklog.Header{Tool: "test", Source: "x.avi", Width: 640, Height: 480, FPS: 30,
		Settings: map[string]any{"failsafe_s": 0.3}})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 5; i++ {
		r := tracklog.Record{Frame: i, T: float64(i) / 30, Tracking: i < 3, Alarm: i >= 3, Confidence: 0.9, State: "holding",
			Points: [][2]float64{{320.04, 479}, {321, 400}}, OffsetPx: 1.23456, Method: "classical"}
		if i == 1 {
			reach := -12.34567 // ends short of the reference row
			r.ReachPx = &reach
		}
		if err := w.Write(&r); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close("eof", nil); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func TestRoundTrip(t *testing.T) {
	b := sample(t)
	l, err := tracklog.Read(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	if l.Header.Format != tracklog.Format || l.Header.Width != 640 || len(l.Records) != 5 || l.Summary == nil {
		t.Fatalf("read back %+v", l)
	}
	if s := l.Summary; s.Frames != 5 || s.TrackingFrames != 3 || s.AlarmFrames != 2 || s.Alarms != 1 {
		t.Errorf("summary %+v", s)
	}
	if l.Records[0].OffsetPx != 1.235 || l.Records[0].Points[0] != [2]float64{320, 479} {
		t.Errorf("record 0: %+v", l.Records[0])
	}
	if r := l.Records[1].ReachPx; r == nil || *r != -12.346 {
		t.Errorf("record 1: reach_px %v, want -12.346", r)
	}
	if l.Records[0].ReachPx != nil {
		t.Errorf("record 0: reach_px %v, want none (not reported)", *l.Records[0].ReachPx)
	}
	if strings.Contains(strings.SplitN(string(b), "\n", 2)[0], `"frame"`) {
		t.Error("header has a frame field")
	}
}

// TestChainIsSHA256 recomputes the first line's chain with the standard
// library's SHA-256 directly (32 zero bytes, then the line up to the chain
// field), independently of the package's own hashing code path.
func TestChainIsSHA256(t *testing.T) {
	line := strings.SplitN(string(sample(t)), "\n", 2)[0]
	i := strings.LastIndex(line, `,"chain":"`)
	sum := sha256.Sum256(append(make([]byte, 32), line[:i]...))
	if got := line[i+10 : len(line)-2]; got != hex.EncodeToString(sum[:]) {
		t.Fatalf("chain %s, want %x", got, sum)
	}
}

func TestVerifyFindsTampering(t *testing.T) {
	orig := sample(t)
	lines := strings.SplitAfter(string(orig), "\n")
	lines = lines[:len(lines)-1] // trailing empty
	join := func(ls []string) []byte { return []byte(strings.Join(ls, "")) }
	edit := append([]string(nil), lines...)
	edit[3] = strings.Replace(edit[3], `"alarm":false`, `"alarm":true`, 1)
	del := append(append([]string(nil), lines[:2]...), lines[3:]...)
	swap := append([]string(nil), lines...)
	swap[2], swap[3] = swap[3], swap[2]
	cases := map[string]struct {
		b    []byte
		line string
	}{
		"edited record":  {join(edit), "line 4:"},
		"deleted record": {join(del), "line 3:"},
		"reordered":      {join(swap), "line 3:"},
		"torn last line": {orig[:len(orig)-20], "torn"},
		"empty":          {nil, "empty"},
	}
	for name, tc := range cases {
		t.Run(name, func(t *testing.T) {
			_, err := tracklog.Verify(bytes.NewReader(tc.b))
			if !errors.Is(err, tracklog.ErrBroken) || !strings.Contains(err.Error(), tc.line) {
				t.Fatalf("Verify: %v, want ErrBroken naming %q", err, tc.line)
			}
		})
	}
	if n, err := tracklog.Verify(bytes.NewReader(orig)); err != nil || n != 7 {
		t.Fatalf("untouched log: %d lines, %v", n, err)
	}
}
