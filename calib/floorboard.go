package calib

import (
	"fmt"
	"math"

	"gocv.io/x/gocv"
)

// FloorFromBoard fits the floor mapping to a chessboard laid flat on the
// floor, square to the vehicle's axis, whose centre (the middle of its
// inner corners) lies at floor point centre (mm, X forward, Y right).
// img is a raw frame (not retained); lens may be nil. Which board edge
// points forward is taken from the image: the board direction that runs
// up the image is forward, the one that runs right is right.
func FloorFromBoard(lens *Lens, img gocv.Mat, board BoardSpec, centre Pt) (Floor, FloorReport, error) {
	corners, err := FindBoard(img, board)
	if err != nil {
		return Floor{}, FloorReport{}, fmt.Errorf("calib: %w: lay the whole board flat in view, evenly lit, and check -board counts inner corners", err)
	}
	und := corners
	if lens != nil {
		und = make([]Pt, len(corners))
		for i, p := range corners {
			x, y, err := lens.Undistort(p.X, p.Y)
			if err != nil {
				return Floor{}, FloorReport{}, err
			}
			und[i] = Pt{x, y}
		}
	}
	grid := board.corners()
	G, err := FitHomography(grid, und)
	if err != nil {
		return Floor{}, FloorReport{}, err
	}
	s := float64(board.Square)
	gc := Pt{float64(board.Cols-1) * s / 2, float64(board.Rows-1) * s / 2}
	c0x, c0y, _ := G.Apply(gc.X, gc.Y)
	// Image direction of each unit grid direction at the board's centre.
	dirs := []Pt{{1, 0}, {-1, 0}, {0, 1}, {0, -1}}
	img2 := make([]Pt, len(dirs))
	for i, d := range dirs {
		x, y, _ := G.Apply(gc.X+d.X*s, gc.Y+d.Y*s)
		n := math.Hypot(x-c0x, y-c0y)
		img2[i] = Pt{(x - c0x) / n, (y - c0y) / n}
	}
	fwd, right := 0, 0
	for i := range dirs {
		if -img2[i].Y > -img2[fwd].Y {
			fwd = i
		}
	}
	first := true
	for i := range dirs {
		if dirs[i].X*dirs[fwd].X+dirs[i].Y*dirs[fwd].Y != 0 {
			continue // not perpendicular to forward
		}
		if first || img2[i].X > img2[right].X {
			right, first = i, false
		}
	}
	f, r := dirs[fwd], dirs[right]
	floor := make([]Pt, len(grid))
	for i, g := range grid {
		dx, dy := g.X-gc.X, g.Y-gc.Y
		floor[i] = Pt{centre.X + dx*f.X + dy*f.Y, centre.Y + dx*r.X + dy*r.Y}
	}
	fl, rep, err := FloorFromPoints(lens, corners, floor)
	if err != nil {
		return Floor{}, FloorReport{}, err
	}
	fl.Method = "board"
	return fl, rep, nil
}
