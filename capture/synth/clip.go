package synth

import (
	"errors"
	"fmt"
	"io"
	"os"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/truth"
)

// WriteClip renders the whole scenario to an MJPEG AVI at videoPath (at the
// scenario's FPS) and its truth to an NDJSON file at truthPath.
func WriteClip(sc Scenario, videoPath, truthPath string) (err error) {
	r, err := New(sc)
	if err != nil {
		return err
	}
	defer r.Close()
	tf, err := os.Create(truthPath)
	if err != nil {
		return fmt.Errorf("synth: %w", err)
	}
	defer func() {
		if cerr := tf.Close(); err == nil && cerr != nil {
			err = fmt.Errorf("synth: %s: %w", truthPath, cerr)
		}
	}()
	tw, err := truth.NewWriter(tf, r.Header())
	if err != nil {
		return fmt.Errorf("synth: %s: %w", truthPath, err)
	}
	vw, err := gocv.VideoWriterFile(videoPath, "MJPG", sc.FPS, sc.Width, sc.Height, true)
	if err != nil {
		if vw != nil {
			vw.Close()
		}
		return fmt.Errorf("synth: %s: %w", videoPath, err)
	}
	defer vw.Close()
	if !vw.IsOpened() {
		return fmt.Errorf("synth: %s: video writer did not open (MJPG)", videoPath)
	}
	m := gocv.NewMat()
	defer m.Close()
	for {
		_, err := r.Read(&m)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return err
		}
		if err := vw.Write(m); err != nil {
			return fmt.Errorf("synth: %s: %w", videoPath, err)
		}
		if err := tw.Write(r.Truth()); err != nil {
			return fmt.Errorf("synth: %s: %w", truthPath, err)
		}
	}
	return nil
}
