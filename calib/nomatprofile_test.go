//go:build !matprofile

package calib

func openMats() (int, func(), bool) { return 0, func() {}, false }
