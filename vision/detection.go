package vision

// Point is a position in image pixels (x right, y down).
type Point struct{ X, Y float64 }

// Detection is one frame's measurement of the stripe. It holds no Mat and
// may be kept by the caller.
type Detection struct {
	// Found is true when a centreline was fitted. When false the other
	// measurement fields are zero and Confidence is 0.
	Found bool
	// Points is the fitted centreline, ordered from the near (bottom) end
	// to the far end, at least 8 points spread over the detected length.
	Points []Point
	// RefRow is the image row at which OffsetPx, HeadingDeg and WidthPx
	// are measured.
	RefRow float64
	// OffsetPx, HeadingDeg: see the package documentation.
	OffsetPx   float64
	HeadingDeg float64
	// WidthPx is the apparent stripe width at RefRow, measured across
	// the stripe in pixels.
	WidthPx float64
	// Confidence in [0, 1]: how far this measurement can be trusted.
	Confidence float64
	// Method names the detector that produced the measurement
	// ("classical", "cnn", ...).
	Method string
	// Reason says, when Found is false or Confidence is low, why
	// ("no candidates", "too few rows", "poor fit", ...).
	Reason string
	// ReachPx, when HasReach is true, is how far, in image rows, the
	// stripe is seen continuously from its near end beyond RefRow (for
	// guidance.Measurement.ReachPx). The classical detector reports it
	// when the near mark ends just beyond RefRow before an unseen stretch
	// too long to bridge (a missing stretch of tape arriving): its fitted
	// Points then run on across that stretch to the line beyond it, and
	// their far end says nothing about the line ending under the camera.
	// Otherwise HasReach is false and the reach is the Points' far end.
	ReachPx  float64
	HasReach bool
	// Lane is set by the lane detector: the two boundaries and the
	// lane's width. Points, OffsetPx and HeadingDeg are then the lane's
	// centre, and WidthPx the boundaries' mean line width. Nil in stripe
	// mode.
	Lane *LaneMeasure
}

// LaneMeasure is the lane detector's view of the two boundary lines.
type LaneMeasure struct {
	// Left and Right are the boundaries' centrelines, near end first; a
	// boundary not seen in this frame is empty.
	Left, Right []Point
	// WidthPx is the lane's width at RefRow (the horizontal distance
	// between the boundaries' centrelines): measured when both are seen,
	// the learned width otherwise.
	WidthPx float64
	// BothSeen is false when the centre was inferred from one boundary
	// and the learned width.
	BothSeen bool
	// ReachPx is how far, in image rows, the lane is seen continuously
	// from its near end beyond RefRow (positive, counted up to the far
	// end of the near half of the region at most) or short of it
	// (negative), for guidance.Measurement.ReachPx: from the boundaries'
	// support, not their fitted curves, which run on across a worn gap.
	// Negative as well when the nearest support lies well beyond RefRow
	// (the near part of the lines is not there).
	ReachPx float64
}

// Hint is what the tracker expects the stripe to look like in this frame.
// A zero Hint (Valid false) means no prior: search the whole region.
type Hint struct {
	Valid bool
	// OffsetPx and HeadingDeg predicted at RefRow, with 1-sigma
	// uncertainties in the same units.
	OffsetPx, HeadingDeg      float64
	OffsetSigma, HeadingSigma float64
}
