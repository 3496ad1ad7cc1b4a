//go:build matprofile

package cnn

import (
	"bytes"
	"fmt"
	"os"

	"gocv.io/x/gocv"
)

func leakedMats() bool {
	n := gocv.MatProfile.Count()
	if n == 0 {
		return false
	}
	var b bytes.Buffer
	gocv.MatProfile.WriteTo(&b, 1)
	fmt.Fprintf(os.Stderr, "cnn: %d Mats left open:\n%s", n, b.String())
	return true
}
