//go:build !matprofile

package cnn

func leakedMats() bool { return false }
