package calib

import (
	"fmt"
	"image"
	"image/color"
	"math"

	"gocv.io/x/gocv"
)

// Area is a rectangle on the floor, mm.
type Area struct {
	XMin, XMax Millimetres // forward
	YMin, YMax Millimetres // right
}

// MaxBirdsEyeSide bounds the bird's-eye image's width and height, pixels.
const MaxBirdsEyeSide = 4000

// BirdsEye renders the floor area as seen from above: far is at the top,
// right is right, mmPerPx millimetres per output pixel, with grid lines
// every gridMM (the lines through the floor origin drawn brighter) so a
// person can check the calibration by eye: straight tape must look
// straight, measured marks must sit on their grid positions. img is a raw
// 8-bit BGR frame of the calibration's size (not retained); the caller
// closes the returned Mat. Floor outside the camera's view is black.
func BirdsEye(img gocv.Mat, m *Mapper, area Area, mmPerPx float64, gridMM Millimetres) (gocv.Mat, error) {
	if img.Empty() || img.Type() != gocv.MatTypeCV8UC3 {
		return gocv.Mat{}, fmt.Errorf("calib: bird's-eye view needs an 8-bit BGR frame")
	}
	if !finite(mmPerPx, float64(gridMM), float64(area.XMin), float64(area.XMax), float64(area.YMin), float64(area.YMax)) || mmPerPx <= 0 || gridMM < 0 {
		return gocv.Mat{}, fmt.Errorf("calib: bird's-eye view: scale %g mm/px and grid %v mm must be positive numbers", mmPerPx, gridMM)
	}
	w := int(math.Round(float64(area.YMax-area.YMin) / mmPerPx))
	h := int(math.Round(float64(area.XMax-area.XMin) / mmPerPx))
	if w < 2 || h < 2 || w > MaxBirdsEyeSide || h > MaxBirdsEyeSide {
		return gocv.Mat{}, fmt.Errorf("calib: bird's-eye view of %dx%d px: choose an area and scale giving 2 to %d px a side", w, h, MaxBirdsEyeSide)
	}
	mapX := gocv.NewMatWithSize(h, w, gocv.MatTypeCV32F)
	defer mapX.Close()
	mapY := gocv.NewMatWithSize(h, w, gocv.MatTypeCV32F)
	defer mapY.Close()
	for r := 0; r < h; r++ {
		X := float64(area.XMax) - (float64(r)+0.5)*mmPerPx
		for c := 0; c < w; c++ {
			Y := float64(area.YMin) + (float64(c)+0.5)*mmPerPx
			p, ok := m.ToImage(Pt{X, Y})
			if !ok || !finite(p.X, p.Y) || math.Abs(p.X) > 1e6 || math.Abs(p.Y) > 1e6 {
				p = Pt{-1e6, -1e6} // outside the frame: black
			}
			mapX.SetFloatAt(r, c, float32(p.X))
			mapY.SetFloatAt(r, c, float32(p.Y))
		}
	}
	out := gocv.NewMat()
	gocv.Remap(img, &out, &mapX, &mapY, gocv.InterpolationLinear, gocv.BorderConstant, color.RGBA{})
	if gridMM > 0 {
		minor := color.RGBA{R: 0, G: 200, B: 255, A: 255}
		axis := color.RGBA{R: 255, G: 60, B: 60, A: 255}
		g := float64(gridMM)
		for Y := math.Ceil(float64(area.YMin)/g) * g; Y <= float64(area.YMax); Y += g {
			c := int(math.Round((Y - float64(area.YMin)) / mmPerPx))
			col := minor
			if math.Abs(Y) < g/2 {
				col = axis
			}
			gocv.Line(&out, image.Pt(c, 0), image.Pt(c, h-1), col, 1)
		}
		for X := math.Ceil(float64(area.XMin)/g) * g; X <= float64(area.XMax); X += g {
			r := int(math.Round((float64(area.XMax) - X) / mmPerPx))
			col := minor
			if math.Abs(X) < g/2 {
				col = axis
			}
			gocv.Line(&out, image.Pt(0, r), image.Pt(w-1, r), col, 1)
		}
		label := fmt.Sprintf("grid %.0f mm, far at top", g)
		gocv.PutText(&out, label, image.Pt(4, 14), gocv.FontHersheySimplex, 0.4, color.RGBA{R: 255, G: 255, B: 255, A: 255}, 1)
	}
	return out, nil
}
