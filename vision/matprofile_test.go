//go:build matprofile

package vision

import (
	"bytes"

	"gocv.io/x/gocv"
)

func openMats() (int, string) {
	var b bytes.Buffer
	_ = gocv.MatProfile.WriteTo(&b, 1)
	return gocv.MatProfile.Count(), b.String()
}
