package vision

import "math"

// FloorMap is what FloorTop needs of a floor calibration: the floor
// position of a raw image pixel, forward distance first (millimetres),
// with ok false above the horizon, where the pixel's ray never meets the
// floor. calib.Mapper.ToFloor provides it.
type FloorMap interface {
	ToFloorMM(x, y float64) (forward, right float64, ok bool)
}

// FloorRangeMM is the farthest floor FloorTop keeps in the region of
// interest. At 15 m a 50 mm tape seen by a 640 px wide camera with a
// 60° lens (focal length about 550 px) is under 2 px wide: too thin to
// measure, and that far ahead the floor meets walls and racks
// (a judgement, from the pinhole width f·W/Z; not a standard).
const FloorRangeMM = 15000

// FloorTop is the top of the region of interest, as a fraction of the
// frame height, that keeps the search on the floor: for each of 17
// columns across a w×h frame it finds the highest row whose pixel still
// meets the floor within FloorRangeMM, and returns the lowest of those
// rows (so that nothing above the horizon is searched anywhere across the
// frame). It never returns more than 0.7: the region keeps at least the
// bottom 30 % of the frame. A frame where every row meets the floor (a
// camera looking down) gives 0.
func FloorTop(m FloorMap, w, h int) float64 {
	if m == nil || w <= 0 || h <= 0 {
		return 0
	}
	top := 0.0
	const cols = 17
	for i := 0; i < cols; i++ {
		x := (float64(i) + 0.5) / cols * float64(w)
		// Walk up from the bottom row to the first row off the floor.
		yTop := -1
		for y := h - 1; y >= 0; y-- {
			fwd, _, ok := m.ToFloorMM(x, float64(y))
			if !ok || math.IsNaN(fwd) || fwd > FloorRangeMM {
				yTop = y
				break
			}
		}
		top = math.Max(top, float64(yTop+1)/float64(h))
	}
	return math.Min(top, 0.7)
}
