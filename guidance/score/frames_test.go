package score_test

import (
	"reflect"
	"testing"

	"github.com/hewline/hewline/guidance/score"
)

// TestFramesWorkedExample: the per-frame verdicts of workedExample, worked
// out by hand from the same rules as TestWorkedExample, and their runs.
// Their counts must agree with Clip's.
func TestFramesWorkedExample(t *testing.T) {
	h, tf, rec := workedExample()
	rec[10].State, rec[10].Reason = "holding", "first of the 12 px run"
	rec[11].State = "coasting"
	for i := 45; i <= 50; i++ {
		rec[i].State, rec[i].MeasReason = "regaining", "short line"
	}
	rec[46].MeasReason = "gaps along the line"
	fs, err := score.Frames(h, tf, rec)
	if err != nil {
		t.Fatal(err)
	}
	want := func(i int) score.Verdict {
		switch {
		case i < 10, i >= 25 && i < 30, i >= 51:
			return score.Right
		case i < 20:
			return score.Off // 12 px: outside 10, inside 30
		case i < 25, i < 33:
			return score.False // 40 px off; tracking into the gap
		case i < 45:
			return score.Quiet
		default:
			return score.Missed // visible, alarm on, not tracking
		}
	}
	counts := map[score.Verdict]int{}
	for i, f := range fs {
		counts[f.Verdict]++
		if f.Verdict != want(i) {
			t.Errorf("frame %d: %v, want %v", i, f.Verdict, want(i))
		}
	}
	r, _ := score.Clip("worked", h, tf, rec)
	if counts[score.Right] != r.CorrectFrames || counts[score.False] != r.FalseTracks {
		t.Errorf("right %d false %d; Clip: correct %d false tracks %d", counts[score.Right], counts[score.False], r.CorrectFrames, r.FalseTracks)
	}

	runs := score.Runs(fs)
	type brief struct {
		first, last int
		v           score.Verdict
		states      []string
		reason      string
		meas        string
		measN       int
	}
	var got []brief
	for _, r := range runs {
		got = append(got, brief{r.First, r.Last, r.Verdict, r.States, r.Reason, r.MeasReason, r.MeasReasonFrames})
	}
	wantRuns := []brief{
		{10, 19, score.Off, []string{"holding", "coasting"}, "first of the 12 px run", "", 0},
		{20, 24, score.False, nil, "", "", 0},
		{30, 32, score.False, nil, "", "", 0},
		{45, 50, score.Missed, []string{"regaining"}, "", "short line", 5},
	}
	if !reflect.DeepEqual(got, wantRuns) {
		t.Errorf("runs:\n got %+v\nwant %+v", got, wantRuns)
	}
	if s := runs[0].String(); s != `frames 10–19 (10): off, line 12.0–12.0 px off; holding, coasting; tracker: "first of the 12 px run"` {
		t.Errorf("String: %s", s)
	}
}

// TestFramesRefusesMismatchedLogs: a log of another length or frame
// numbering cannot be judged against the truth.
func TestFramesRefusesMismatchedLogs(t *testing.T) {
	h, tf, rec := workedExample()
	if _, err := score.Frames(h, tf, rec[:59]); err == nil {
		t.Error("a log one frame short was judged")
	}
	rec[7].Frame = 70
	if _, err := score.Frames(h, tf, rec); err == nil {
		t.Error("a log with frame 7 numbered 70 was judged")
	}
}
