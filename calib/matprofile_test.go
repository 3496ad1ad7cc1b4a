//go:build matprofile

package calib

import (
	"os"

	"gocv.io/x/gocv"
)

func openMats() (int, func(), bool) {
	return gocv.MatProfile.Count(), func() { gocv.MatProfile.WriteTo(os.Stderr, 1) }, true
}
