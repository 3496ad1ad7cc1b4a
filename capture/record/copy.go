package record

import (
	"context"
	"errors"
	"fmt"
	"io"
	"time"

	"github.com/hewline/hewline/capture"
	"gocv.io/x/gocv"
)

// Source is a frame source as Copy needs it (camera, video file, ...).
type Source interface {
	Read(dst *gocv.Mat) (capture.FrameInfo, error)
}

// CopyOptions control Copy.
type CopyOptions struct {
	// For stops the copy at this much source time (FrameInfo.T); 0 means
	// until the source ends or ctx is cancelled.
	For time.Duration
	// Transient, when set, is asked about each Read error; true means log
	// it and keep reading (a camera stall or loss being reopened).
	Transient func(error) bool
}

// Copy reads src until it ends (io.EOF), opt.For is reached or ctx is
// cancelled, and writes every frame to r. It returns the number of frames
// read and the first error that ended the copy early (not counting a
// recording that stopped: see r.Err). The caller closes r and src.
func Copy(ctx context.Context, src Source, r *Recorder, opt CopyOptions) (int, error) {
	frame := gocv.NewMat()
	defer frame.Close()
	n := 0
	for ctx.Err() == nil {
		info, err := src.Read(&frame)
		if errors.Is(err, io.EOF) {
			return n, nil
		}
		if err != nil {
			if opt.Transient != nil && opt.Transient(err) {
				continue
			}
			return n, fmt.Errorf("record: read source: %w", err)
		}
		if opt.For > 0 && info.T >= opt.For {
			return n, nil
		}
		n++
		if err := r.Write(frame, info); err != nil {
			return n, err
		}
	}
	return n, nil
}
