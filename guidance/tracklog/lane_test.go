package tracklog_test

import (
	"bytes"
	"strings"
	"testing"

	"github.com/hewline/hewline/guidance/tracklog"
)

// TestLaneFields: lane-mode records carry both boundaries and the lane
// width, and stripe-mode records (as all logs before lane mode) carry none
// of the lane fields, so older readers see no change.
func TestLaneFields(t *testing.T) {
	var buf bytes.Buffer
	w, err := tracklog.NewWriter(&buf, tracklog.Header{Tool: "test", Width: 640, Height: 480, FPS: 30, Follow: "lane"})
	if err != nil {
		t.Fatal(err)
	}
	mm := 901.25
	recs := []tracklog.Record{
		{Frame: 0, State: "holding", Tracking: true, Points: [][2]float64{{320, 479}, {322, 300}},
			LeftPoints: [][2]float64{{115.04, 479}, {200, 300}}, RightPoints: [][2]float64{{525, 479}, {444, 300}},
			LanePx: 337.2424, LaneMM: &mm, Method: "lane"},
		{Frame: 1, State: "holding", Tracking: true, Points: [][2]float64{{320, 479}},
			RightPoints: [][2]float64{{525, 479}}, LanePx: 337, Method: "lane"}, // one side seen
		{Frame: 2, State: "holding", Points: [][2]float64{{320, 479}}, Method: "classical"}, // stripe-like
	}
	for i := range recs {
		if err := w.Write(&recs[i]); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close("eof", nil); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(buf.String(), "\n")
	for _, k := range []string{"left_points", "right_points", "lane_width_px", "lane_width_mm"} {
		if strings.Contains(lines[3], k) {
			t.Errorf("stripe-like record has %s: %s", k, lines[3])
		}
	}
	if strings.Contains(lines[2], "left_points") || strings.Contains(lines[2], "lane_width_mm") {
		t.Errorf("one-side record: %s", lines[2])
	}
	l, err := tracklog.Read(bytes.NewReader(buf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	r := l.Records[0]
	if l.Header.Follow != "lane" || r.LanePx != 337.242 || r.LaneMM == nil || *r.LaneMM != 901.25 ||
		r.LeftPoints[0] != [2]float64{115, 479} || len(r.RightPoints) != 2 || r.Points[1] != [2]float64{322, 300} {
		t.Errorf("read back %+v", r)
	}
	if r := l.Records[1]; r.LeftPoints != nil || len(r.RightPoints) != 1 {
		t.Errorf("one side: %+v", r)
	}
}
