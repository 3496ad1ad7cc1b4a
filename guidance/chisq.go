package guidance

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// ChiSquareQuantile returns the value below which a chi-square variable
// with dof degrees of freedom falls with probability p: the innovation gate
// for a measurement of dof components accepted with probability p when the
// filter is right. It returns NaN when p is not in (0, 1) or dof < 1.
func ChiSquareQuantile(p float64, dof int) float64 {
	if !(p > 0 && p < 1) || dof < 1 {
		return math.NaN()
	}
	return distuv.ChiSquared{K: float64(dof)}.Quantile(p)
}
