package pipeline

import (
	"fmt"
	"image"
	"image/color"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/guidance/tracklog"
	"github.com/hewline/hewline/vision"
)

// RecordWriter takes track-log records: a *tracklog.Writer or a
// *tracklog.RotatingWriter. It must not retain the record.
type RecordWriter interface {
	Write(r *tracklog.Record) error
}

// LogSink writes every frame to a track log. In lane mode (the detection
// carries a vision.LaneMeasure) the record adds the boundaries and the
// lane's width.
type LogSink struct {
	W           RecordWriter
	rec         tracklog.Record
	left, right [][2]float64 // reused boundary buffers
	pred        [][2]float64 // reused predicted-line buffer
}

// points converts detector points into the log's pairs, reusing dst.
func points(dst [][2]float64, src []vision.Point) [][2]float64 {
	dst = dst[:0]
	for _, p := range src {
		dst = append(dst, [2]float64{p.X, p.Y})
	}
	return dst
}

// Frame implements Sink.
func (s *LogSink) Frame(r *Result, _ gocv.Mat) error {
	if r.Tick {
		return nil // the log has one record per frame
	}
	rec := &s.rec
	pts := points(rec.Points, r.Det.Points)
	*rec = tracklog.Record{
		Frame:          r.Info.Index,
		T:              r.Info.T.Seconds(),
		Tracking:       r.Est.Tracking,
		Alarm:          r.Est.Alarm,
		Confidence:     r.Est.Confidence,
		State:          r.Est.State.String(),
		Points:         pts,
		OffsetPx:       r.Est.OffsetPx,
		HeadingDeg:     r.Est.HeadingDeg,
		Method:         r.Det.Method,
		WidthPx:        r.Det.WidthPx,
		MeasConfidence: r.Det.Confidence,
		Gated:          r.Est.Gated,
		Reason:         r.Est.Reason,
	}
	if !r.Det.Found {
		rec.Points = pts[:0]
		if r.Det.Reason != "" && rec.Reason == "" {
			rec.Reason = r.Det.Reason
		}
	} else {
		m := r.Det.OffsetPx
		rec.MeasOffsetPx = &m
		rec.MeasReason = r.Det.Reason
		if rows, ok := reach(r.Det); ok {
			rec.ReachPx = &rows
		}
		if ln := r.Det.Lane; ln != nil {
			if len(ln.Left) > 0 {
				s.left = points(s.left, ln.Left)
				rec.LeftPoints = s.left
			}
			if len(ln.Right) > 0 {
				s.right = points(s.right, ln.Right)
				rec.RightPoints = s.right
			}
			rec.LanePx = ln.WidthPx
		}
	}
	if len(r.Predicted) > 0 {
		s.pred = points(s.pred, r.Predicted)
		rec.PredictedPoints = s.pred
	}
	if r.Floor != nil && r.Est.Tracking {
		off, head, w := r.Floor.OffsetMM, r.Floor.HeadingDeg, r.Floor.WidthMM
		rec.OffsetMM, rec.HeadingFloorDeg, rec.WidthMM = &off, &head, &w
		if r.Floor.LaneOK {
			lw := r.Floor.LaneWidthMM
			rec.LaneMM = &lw
		}
	}
	if !r.Captured.IsZero() && !r.Decided.IsZero() {
		d := float64(r.Decided.Sub(r.Captured).Microseconds()) / 1000
		rec.DecisionMS = &d
	}
	return s.W.Write(rec)
}

// VideoSink writes an annotated copy of every frame to an MJPEG AVI: the
// detected centreline, the reference row, offset, heading, state and a red
// border with "ALARM" while the fail-safe is on.
type VideoSink struct {
	Path string
	FPS  float64
	w    *gocv.VideoWriter
	buf  gocv.Mat
	size image.Point
}

// Frame implements Sink.
func (s *VideoSink) Frame(r *Result, img gocv.Mat) error {
	if r.Tick || img.Empty() {
		return nil
	}
	sz := image.Pt(img.Cols(), img.Rows())
	if s.w == nil {
		fps := s.FPS
		if fps <= 0 {
			fps = 30
		}
		w, err := gocv.VideoWriterFile(s.Path, "MJPG", fps, sz.X, sz.Y, true)
		if err != nil {
			return fmt.Errorf("annotated video %s: %w", s.Path, err)
		}
		s.w, s.size, s.buf = w, sz, gocv.NewMat()
	}
	img.CopyTo(&s.buf)
	if sz != s.size {
		gocv.Resize(s.buf, &s.buf, s.size, 0, 0, gocv.InterpolationLinear)
	}
	Annotate(&s.buf, r)
	if err := s.w.Write(s.buf); err != nil {
		return fmt.Errorf("annotated video %s: %w", s.Path, err)
	}
	return nil
}

// Close finishes the video file.
func (s *VideoSink) Close() error {
	if s.w != nil {
		s.w.Close()
		s.buf.Close()
		s.w = nil
	}
	return nil
}

var (
	green  = color.RGBA{0, 220, 0, 0}
	yellow = color.RGBA{255, 210, 0, 0}
	red    = color.RGBA{255, 0, 0, 0}
	white  = color.RGBA{255, 255, 255, 0}
	black  = color.RGBA{0, 0, 0, 0}
	cyan   = color.RGBA{0, 200, 255, 0}
)

// Annotate draws r onto img (BGR) in place.
func Annotate(img *gocv.Mat, r *Result) {
	w, h := img.Cols(), img.Rows()
	scale := float64(w) / 640
	th := max(1, int(2*scale+0.5))
	// The detection is green when guidance used it, yellow otherwise;
	// while guidance coasts on the filter, its predicted line is cyan.
	col := yellow
	if r.Est.Tracking && len(r.Predicted) == 0 {
		col = green
	}
	polyline := func(pts []vision.Point, c color.RGBA) {
		for i := 1; i < len(pts); i++ {
			a, b := pts[i-1], pts[i]
			gocv.Line(img, image.Pt(int(a.X), int(a.Y)), image.Pt(int(b.X), int(b.Y)), c, th)
		}
	}
	if ln := r.Det.Lane; ln != nil && r.Det.Found {
		polyline(ln.Left, white)
		polyline(ln.Right, white)
	}
	polyline(r.Det.Points, col)
	polyline(r.Predicted, cyan)
	if r.Det.Found {
		y := int(r.Det.RefRow)
		gocv.Line(img, image.Pt(w/2, y-int(8*scale)), image.Pt(w/2, y+int(8*scale)), white, th)
		if r.Est.Tracking {
			x := int(float64(w)/2 + r.Est.OffsetPx)
			gocv.Circle(img, image.Pt(x, y), int(6*scale)+1, green, th)
		}
	}
	fs := 0.5 * scale
	line := func(row int, s string, c color.RGBA) {
		p := image.Pt(int(8*scale), int(float64(18+row*18)*scale))
		gocv.PutText(img, s, p.Add(image.Pt(1, 1)), gocv.FontHersheySimplex, fs, black, th)
		gocv.PutText(img, s, p, gocv.FontHersheySimplex, fs, c, max(1, th/2))
	}
	line(0, fmt.Sprintf("frame %d  t %.2fs  %s", r.Info.Index, r.Info.T.Seconds(), r.Est.State), white)
	if r.Est.Tracking {
		line(1, fmt.Sprintf("offset %+.1f px  heading %+.1f deg  conf %.2f", r.Est.OffsetPx, r.Est.HeadingDeg, r.Est.Confidence), white)
	} else {
		line(1, "NOT TRACKING: "+r.Est.Reason, yellow)
	}
	if r.Floor != nil && r.Est.Tracking {
		line(2, fmt.Sprintf("floor offset %+.0f mm  heading %+.1f deg", r.Floor.OffsetMM, r.Floor.HeadingDeg), white)
	}
	if r.Est.Alarm {
		b := max(4, int(8*scale))
		gocv.Rectangle(img, image.Rect(b/2, b/2, w-b/2, h-b/2), red, b)
		gocv.PutText(img, "ALARM", image.Pt(w/2-int(60*scale), h/2), gocv.FontHersheySimplex, 1.5*scale, red, 2*th)
	}
}
