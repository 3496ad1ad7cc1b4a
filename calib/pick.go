package calib

import (
	"errors"
	"fmt"
	"image"
	"io"
	"math"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
)

// FrameReader is a source of frames, such as a recorded clip: Read
// decodes the next frame into dst (the caller's Mat) and returns io.EOF at
// the end.
type FrameReader interface {
	Read(dst *gocv.Mat) (capture.FrameInfo, error)
}

// PickOptions tune PickViews. Zero values take the defaults.
type PickOptions struct {
	// Every examines one frame in Every (default 5): neighbouring frames
	// of a waved board are nearly the same view.
	Every int
	// Max is how many views to keep (default 20).
	Max int
	// MaxFrames stops after this many frames read (default 20000).
	MaxFrames int
}

// PickViews reads a clip of someone waving the board and picks up to
// opt.Max views where the board is found, spread as far apart as
// possible in position, size and tilt (greedy farthest-point choice), so
// the calibration sees the whole image and several angles. The returned
// views hold grey Mats the caller must Close; seen counts the frames
// examined and found those with the board.
func PickViews(src FrameReader, board BoardSpec, opt PickOptions) (views []View, seen, found int, err error) {
	if err := board.check(); err != nil {
		return nil, 0, 0, err
	}
	if opt.Every <= 0 {
		opt.Every = 5
	}
	if opt.Max <= 0 {
		opt.Max = 20
	}
	if opt.MaxFrames <= 0 {
		opt.MaxFrames = 20000
	}
	type cand struct {
		name string
		img  gocv.Mat
		desc [5]float64
	}
	var cands []cand
	defer func() {
		for _, c := range cands {
			c.img.Close()
		}
	}()
	frame := gocv.NewMat()
	defer frame.Close()
	gray := gocv.NewMat()
	defer gray.Close()
	corners := gocv.NewMat()
	defer corners.Close()
	for n := 0; n < opt.MaxFrames; n++ {
		info, rerr := src.Read(&frame)
		if errors.Is(rerr, io.EOF) {
			break
		}
		if rerr != nil {
			return nil, seen, found, fmt.Errorf("calib: reading frame %d: %w", n, rerr)
		}
		if n%opt.Every != 0 {
			continue
		}
		seen++
		g, owned, gerr := toGray(frame)
		if gerr != nil {
			continue
		}
		g.CopyTo(&gray)
		if owned {
			g.Close()
		}
		if !gocv.FindChessboardCorners(gray, image.Pt(board.Cols, board.Rows), &corners,
			gocv.CalibCBAdaptiveThresh|gocv.CalibCBNormalizeImage|gocv.CalibCBFastCheck) {
			continue
		}
		data, derr := corners.DataPtrFloat32()
		if derr != nil || len(data) != 2*board.Cols*board.Rows {
			continue
		}
		found++
		cands = append(cands, cand{
			name: fmt.Sprintf("frame %d (%.2f s)", info.Index, info.T.Seconds()),
			img:  gray.Clone(),
			desc: viewDescriptor(data, board, gray.Cols(), gray.Rows()),
		})
	}
	if len(cands) == 0 {
		return nil, seen, 0, fmt.Errorf("calib: %w in any of the %d frames examined: check -board counts inner corners, and that the whole board is in view and sharp", ErrNoBoard, seen)
	}
	// Greedy farthest-point choice, starting from the first view.
	chosen := []int{0}
	dist := make([]float64, len(cands))
	for i := range dist {
		dist[i] = math.Inf(1)
	}
	for len(chosen) < opt.Max && len(chosen) < len(cands) {
		last := cands[chosen[len(chosen)-1]].desc
		best := -1
		for i := range cands {
			var d float64
			for k := range last {
				d += (cands[i].desc[k] - last[k]) * (cands[i].desc[k] - last[k])
			}
			dist[i] = math.Min(dist[i], d)
			if best < 0 || dist[i] > dist[best] {
				best = i
			}
		}
		if dist[best] == 0 {
			break
		}
		chosen = append(chosen, best)
	}
	for _, i := range chosen {
		views = append(views, View{Name: cands[i].name, Img: cands[i].img})
		cands[i].img = gocv.Mat{} // handed over
	}
	var keep []cand
	for _, c := range cands {
		if c.img.Ptr() != nil {
			keep = append(keep, c)
		}
	}
	cands = keep
	return views, seen, found, nil
}

// viewDescriptor summarises where the board is and how it is tilted:
// centre (as fractions of the image), size, and the log ratios of
// opposite board edges (the perspective foreshortening in two directions).
func viewDescriptor(c []float32, b BoardSpec, w, h int) [5]float64 {
	at := func(col, row int) Pt {
		i := 2 * (row*b.Cols + col)
		return Pt{float64(c[i]), float64(c[i+1])}
	}
	tl, tr, bl, br := at(0, 0), at(b.Cols-1, 0), at(0, b.Rows-1), at(b.Cols-1, b.Rows-1)
	l := func(p, q Pt) float64 { return math.Max(math.Hypot(p.X-q.X, p.Y-q.Y), 1) }
	cx := (tl.X + tr.X + bl.X + br.X) / 4 / float64(w)
	cy := (tl.Y + tr.Y + bl.Y + br.Y) / 4 / float64(h)
	size := math.Sqrt(l(tl, br)*l(tr, bl)) / float64(w)
	return [5]float64{cx, cy, size, math.Log(l(tl, tr) / l(bl, br)), math.Log(l(tl, bl) / l(tr, br))}
}
