//go:build matprofile

package matcheck

import (
	"strings"

	"gocv.io/x/gocv"
)

func open() (int, string) {
	var b strings.Builder
	n := gocv.MatProfile.Count()
	if n > 0 {
		gocv.MatProfile.WriteTo(&b, 1)
	}
	return n, b.String()
}
