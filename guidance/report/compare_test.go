package report_test

import (
	"errors"
	"reflect"
	"testing"

	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/tracklog"
)

func mkLog(src string, n int, edit func(i int, r *tracklog.Record)) *tracklog.Log {
	l := &tracklog.Log{Header: tracklog.Header{Source: src, Width: 640, Height: 480, FPS: 30}}
	for i := 0; i < n; i++ {
		r := tracklog.Record{Frame: i, T: float64(i) / 30, Tracking: true, State: "holding", OffsetPx: float64(i)}
		if edit != nil {
			edit(i, &r)
		}
		l.Records = append(l.Records, r)
	}
	return l
}

func TestCompare(t *testing.T) {
	a := mkLog("/clips/aisle.avi", 50, nil)
	b := mkLog("/elsewhere/aisle.avi", 50, func(i int, r *tracklog.Record) {
		switch {
		case i >= 10 && i <= 12: // offsets 15 px apart: over a 10 px tolerance
			r.OffsetPx += 15
		case i == 13: // 5 px apart: within it
			r.OffsetPx -= 5
		case i >= 30 && i <= 33: // lost with the alarm
			r.Tracking, r.Alarm, r.State = false, true, "lost"
		case i == 34: // lost, no alarm, right after: same run
			r.Tracking, r.State = false, "lost"
		}
	})
	d, err := report.Compare(a, b, report.ToleranceFor(10, 640))
	if err != nil {
		t.Fatal(err)
	}
	if d.Frames != 50 || d.Disagree != 3+5 || len(d.Runs) != 2 {
		t.Fatalf("%+v", d)
	}
	if r := d.Runs[0]; r.StartFrame != 10 || r.EndFrame != 12 || !reflect.DeepEqual(r.Kinds, []string{"offset"}) || r.MaxOffsetPx != 15 {
		t.Errorf("run 0: %+v", r)
	}
	if r := d.Runs[1]; r.StartFrame != 30 || r.EndFrame != 34 || !reflect.DeepEqual(r.Kinds, []string{"alarm", "state", "tracking"}) {
		t.Errorf("run 1: %+v", r)
	}
	if d.KindFrames["alarm"] != 4 || d.KindFrames["tracking"] != 5 || d.KindFrames["offset"] != 3 {
		t.Errorf("kind frames %v", d.KindFrames)
	}
	// Identical logs agree.
	if d, err := report.Compare(a, mkLog("aisle.avi", 50, nil), 10); err != nil || d.Disagree != 0 || len(d.Runs) != 0 {
		t.Errorf("identical: %+v %v", d, err)
	}
	// The tolerance scales with the frame width: 10 px at 640 is 20 at 1280.
	if got := report.ToleranceFor(10, 1280); got != 20 {
		t.Errorf("ToleranceFor(10, 1280) = %g", got)
	}
}

func TestCompareRefusesOtherClips(t *testing.T) {
	a := mkLog("aisle.avi", 20, nil)
	for name, b := range map[string]*tracklog.Log{
		"other source": mkLog("dock.avi", 20, nil),
		"fewer frames": mkLog("aisle.avi", 19, nil),
		"other frames": mkLog("aisle.avi", 20, func(i int, r *tracklog.Record) { r.Frame = 2 * i }),
	} {
		if _, err := report.Compare(a, b, 10); !errors.Is(err, report.ErrNotComparable) {
			t.Errorf("%s: %v, want ErrNotComparable", name, err)
		}
	}
}
