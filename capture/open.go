package capture

import (
	"errors"
	"fmt"
	"os"

	"gocv.io/x/gocv"
)

// FileSource is what Open returns: a video file or an image folder.
type FileSource interface {
	Read(dst *gocv.Mat) (FrameInfo, error)
	Info() SourceInfo
	Close() error
}

// Open opens path as an image folder when it is a directory and as a video
// file otherwise.
func Open(path string) (FileSource, error) {
	st, err := os.Stat(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("capture: open %s: %w", path, ErrNotFound)
	}
	if err == nil && st.IsDir() {
		return OpenFolder(path, 0)
	}
	return OpenVideo(path)
}
