package record_test

import (
	"fmt"
	"image"
	"os"
	"path/filepath"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/record"
)

// ExampleRecorder records 45 frames into clips of one second of source
// time and reads the times back from a sidecar.
func ExampleRecorder() {
	dir, _ := os.MkdirTemp("", "hewline-example")
	defer os.RemoveAll(dir)
	r, err := record.New(record.Options{Dir: dir, RotateEvery: time.Second,
		FreeSpace: func(string) (uint64, error) { return 1 << 40, nil }})
	if err != nil {
		fmt.Println(err)
		return
	}
	frame := capturetest.PatternMat(image.Pt(320, 240), 0)
	defer frame.Close()
	for i := 0; i < 45; i++ {
		r.Write(frame, capture.FrameInfo{Index: i, T: time.Duration(i) * 40 * time.Millisecond})
	}
	r.Close()
	for _, f := range r.Files() {
		ts, _ := record.ReadSidecar(record.SidecarPath(f))
		fmt.Println(filepath.Base(f), len(ts), "frames from", ts[0])
	}
	// Output:
	// rec-0001.avi 25 frames from 0s
	// rec-0002.avi 20 frames from 1s
}
