package report_test

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"strings"
	"testing"

	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/tracklog"
)

// TestDemoLogReport builds the report from the track log that "hewline
// demo" wrote for its gap scene (testdata/gap.track.ndjson.gz, kept as
// written) and checks its figures against counts made here from the raw
// JSON lines, without the tracklog types, and against the log's own
// summary line.
func TestDemoLogReport(t *testing.T) {
	f, err := os.Open("testdata/gap.track.ndjson.gz")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	raw, err := io.ReadAll(zr)
	if err != nil {
		t.Fatal(err)
	}
	l, err := tracklog.Read(bytes.NewReader(raw))
	if err != nil {
		t.Fatal(err)
	}

	// Independent count from the raw lines.
	states := map[string]int{}
	frames, tracking, alarms, losses := 0, 0, 0, 0
	var lossStarts []int
	seen, in := false, false
	sc := bufio.NewScanner(bytes.NewReader(raw))
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		var m map[string]any
		if err := json.Unmarshal(sc.Bytes(), &m); err != nil {
			t.Fatal(err)
		}
		fr, ok := m["frame"].(float64)
		if !ok {
			continue
		}
		frames++
		tr, al := m["tracking"].(bool), m["alarm"].(bool)
		states[m["state"].(string)]++
		if tr {
			tracking++
		}
		if al {
			alarms++
		}
		bad := al || (!tr && seen)
		if bad && !in {
			losses++
			lossStarts = append(lossStarts, int(fr))
		}
		in = bad
		seen = seen || tr
	}
	if losses == 0 {
		t.Fatal("the gap scene's log has no loss of tracking: the fixture is not what this test expects")
	}

	r, err := report.Build([]report.Input{{Path: "gap.track.ndjson", Log: l}}, report.Options{NoThumbs: true})
	if err != nil {
		t.Fatal(err)
	}
	s := r.Total
	if s.Frames != frames || s.TrackingFrames != tracking || s.AlarmFrames != alarms || len(s.Losses) != losses {
		t.Errorf("report: %d frames, %d tracking, %d alarm, %d losses; counted %d, %d, %d, %d",
			s.Frames, s.TrackingFrames, s.AlarmFrames, len(s.Losses), frames, tracking, alarms, losses)
	}
	for i, ls := range s.Losses {
		if ls.StartFrame != lossStarts[i] || ls.Cause != report.CauseNoCandidate {
			t.Errorf("loss %d starts at %d (%s), counted %d (the gap scene has no stripe)", i, ls.StartFrame, ls.Cause, lossStarts[i])
		}
	}
	sum := l.Summary
	if sum.Frames != frames || sum.TrackingFrames != tracking || sum.AlarmFrames != alarms || len(s.Alarms) != sum.Alarms {
		t.Errorf("log summary %+v disagrees with the count or the report's %d alarm periods", sum, len(s.Alarms))
	}
	for k, v := range states {
		if s.StateFrames[k] != v || sum.StateFrames[k] != v {
			t.Errorf("state %s: report %d, summary %d, counted %d", k, s.StateFrames[k], sum.StateFrames[k], v)
		}
	}
	// The page shows the counted numbers.
	var out bytes.Buffer
	if err := r.WriteHTML(&out); err != nil {
		t.Fatal(err)
	}
	h := out.String()
	for _, want := range []string{
		fmt.Sprintf(`<th>frames</th><td class="num">%d</td>`, frames),
		fmt.Sprintf(`<th>losses of tracking</th><td class="num">%d</td>`, losses),
		fmt.Sprintf(`%d frames (%.1f %%)`, tracking, 100*float64(tracking)/float64(frames)),
		fmt.Sprintf(`<td>lost</td><td class="num">%d</td>`, states["lost"]),
	} {
		if !strings.Contains(h, want) {
			t.Errorf("the HTML lacks %q", want)
		}
	}
	if n := strings.Count(h, `<tr class="loss">`); n != losses {
		t.Errorf("%d loss rows, counted %d losses", n, losses)
	}
}
