package cnn

import (
	"errors"
	"fmt"
	"image"
	"io"
	"math/rand/v2"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/vision"
	"gocv.io/x/gocv"
)

// Training images are made (or, for site footage, shrunk) at this size
// before they are reduced to the network's input; it keeps rendering and
// degrading cheap while leaving the area-averaging step of Preprocess
// something to average.
const (
	trainW = 160
	trainH = 120
)

// SceneSamples renders n random scenes (RandomScene) from seed, 160 wide
// and 60 to 120 high, degrades
// about three in four of them (Degrade, random strength) and returns them
// as samples labelled from the scenes' exact centrelines.
func SceneSamples(a Arch, n int, seed uint64) ([]Sample, error) {
	rng := rand.New(rand.NewPCG(seed, 0x7363656e6573))
	img := gocv.NewMat()
	defer img.Close()
	pre := NewPreprocessor(a)
	defer pre.Close()
	out := make([]Sample, 0, n)
	for i := 0; i < n; i++ {
		// Two in five scenes are wider than 4:3, as a region of interest
		// cut from the lower part of a frame is.
		h := trainH
		if rng.Float64() < 0.4 {
			h = trainH/2 + rng.IntN(trainH/2)
		}
		roi := image.Rect(0, 0, trainW, h)
		sc := RandomScene(rng, trainW, h)
		if err := sc.Render(&img); err != nil {
			return nil, err
		}
		pts := sc.Truth()
		if rng.Float64() < 0.75 {
			if err := Degrade(&img, pts, sc.WidthNear, 0.3+0.7*rng.Float64(), rng); err != nil {
				return nil, err
			}
		}
		s := Sample{In: make([]float32, a.InW*a.InH), Labels: Labels(a, roi, pts)}
		if err := pre.Run(img, roi, s.In); err != nil {
			return nil, err
		}
		out = append(out, s)
	}
	return out, nil
}

// Labeler is what SiteSamples needs from a detector: the classical one in
// practice. It must not retain the Mat.
type Labeler interface {
	Detect(img gocv.Mat, hint vision.Hint) vision.Detection
}

// FrameReader is a source of BGR frames ending with io.EOF, such as
// capture.Open's.
type FrameReader interface {
	Read(dst *gocv.Mat) (capture.FrameInfo, error)
}

// SiteConfig sets up SiteSamples. Zero fields take the defaults in
// brackets.
type SiteConfig struct {
	// MinConfidence is the lowest labeller confidence accepted as a
	// label [0.8].
	MinConfidence float64
	// Every keeps one frame in Every, so that neighbouring frames do not
	// flood the set [5].
	Every int
	// Copies is the number of degraded copies made of each labelled frame,
	// besides the clean one [3].
	Copies int
	// Max stops after this many labelled frames (0 = no limit).
	Max int
	// ROI is the region the detector will look at (zero = whole frame).
	ROI image.Rectangle
	// Seed drives the degradations [1].
	Seed uint64
}

// SiteStats counts what SiteSamples did.
type SiteStats struct {
	Frames, Used, Unsure int
}

// SiteSamples reads src to the end and turns the frames where lab is
// confident into samples: each such frame's detected centreline becomes
// its labels, and Copies degraded copies (shadow, glare, wear, blur,
// noise, dim light) teach the network to read the stripe where the
// classical detector could not. Frames are shrunk to 160×120 first
// (after cutting out ROI). It does not retain src or lab.
func SiteSamples(src FrameReader, lab Labeler, a Arch, cfg SiteConfig) ([]Sample, SiteStats, error) {
	if cfg.MinConfidence <= 0 {
		cfg.MinConfidence = 0.8
	}
	if cfg.Every <= 0 {
		cfg.Every = 5
	}
	if cfg.Copies < 0 {
		cfg.Copies = 0
	} else if cfg.Copies == 0 {
		cfg.Copies = 3
	}
	if cfg.Seed == 0 {
		cfg.Seed = 1
	}
	rng := rand.New(rand.NewPCG(cfg.Seed, 0x73697465))
	frame, small, work := gocv.NewMat(), gocv.NewMat(), gocv.NewMat()
	defer frame.Close()
	defer small.Close()
	defer work.Close()
	pre := NewPreprocessor(a)
	defer pre.Close()
	var out []Sample
	var st SiteStats
	smallROI := image.Rect(0, 0, trainW, trainH)
	for {
		_, err := src.Read(&frame)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return out, st, fmt.Errorf("cnn: site frame %d: %w", st.Frames, err)
		}
		st.Frames++
		if (st.Frames-1)%cfg.Every != 0 {
			continue
		}
		det := lab.Detect(frame, vision.Hint{})
		if !det.Found || det.Confidence < cfg.MinConfidence || len(det.Points) < 2 {
			st.Unsure++
			continue
		}
		roi := cfg.ROI
		if roi.Empty() {
			roi = image.Rect(0, 0, frame.Cols(), frame.Rows())
		}
		if !roi.In(image.Rect(0, 0, frame.Cols(), frame.Rows())) {
			return out, st, fmt.Errorf("cnn: site ROI %v outside the %dx%d frame", roi, frame.Cols(), frame.Rows())
		}
		region := frame.Region(roi)
		gocv.Resize(region, &small, imagePt(trainW, trainH), 0, 0, gocv.InterpolationArea)
		region.Close()
		kx, ky := float64(trainW)/float64(roi.Dx()), float64(trainH)/float64(roi.Dy())
		pts := make([]vision.Point, len(det.Points))
		for i, p := range det.Points {
			pts[i] = vision.Point{X: (p.X - float64(roi.Min.X)) * kx, Y: (p.Y - float64(roi.Min.Y)) * ky}
		}
		width := det.WidthPx * kx
		if width <= 0 {
			width = 0.06 * trainW
		}
		labels := Labels(a, smallROI, pts)
		for c := 0; c <= cfg.Copies; c++ {
			small.CopyTo(&work)
			if c > 0 {
				if err := Degrade(&work, pts, width, 0.4+0.6*rng.Float64(), rng); err != nil {
					return out, st, err
				}
			}
			s := Sample{In: make([]float32, a.InW*a.InH), Labels: append([]uint8(nil), labels...)}
			if err := pre.Run(work, smallROI, s.In); err != nil {
				return out, st, err
			}
			out = append(out, s)
		}
		st.Used++
		if cfg.Max > 0 && st.Used >= cfg.Max {
			break
		}
	}
	return out, st, nil
}
