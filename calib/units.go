package calib

import "math"

// Millimetres is a length on the floor or on a calibration board.
type Millimetres float64

// Degrees is an angle.
type Degrees float64

// Radians converts d to radians.
func (d Degrees) Radians() float64 { return float64(d) * math.Pi / 180 }

// Pt is a 2-D point: image pixels (x right, y down) or floor millimetres
// (x forward, y right), depending on where it is used.
type Pt struct{ X, Y float64 }

func finite(v ...float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}
