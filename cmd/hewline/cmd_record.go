package main

import (
	"context"
	"errors"
	"fmt"
	"image"
	"io"
	"strings"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/record"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/rs/zerolog"
)

func init() {
	register(&command{
		name:    "record",
		summary: "record a camera (or re-record a file) as MJPEG AVI clips with per-frame timestamps, for replay",
		run:     runRecord,
	})
}

func runRecord(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("record", "[options]", stderr)
	camera := fs.String("camera", "/dev/video0", "camera `DEVICE` (/dev/videoN or a stable /dev/v4l/by-id/... name)")
	source := fs.String("source", "", "re-record a video `FILE` or image folder instead of a camera")
	out := fs.String("o", "recordings", "output `DIR` for rec-NNNN.avi clips and their .frames.ndjson sidecars")
	rotSize := fs.Int64("rotate-size", 1024, "start a new clip after about this many `MB` (0 = no limit)")
	rotTime := fs.Duration("rotate-time", 10*time.Minute, "start a new clip after this much source time (0 = no limit)")
	forDur := fs.Duration("for", 0, "stop after this much source time (0 = until interrupted or the source ends)")
	minFree := fs.Int64("min-free", 256, "stop recording when less than this many `MB` are free")
	pixel := fs.String("format", "", "camera pixel format: mjpeg or yuyv (default: chosen)")
	size := fs.String("size", "", "camera frame size `WxH` (default: largest up to 640x480 at 30 fps or more)")
	fps := fs.Float64("fps", 0, "camera frame rate (default: chosen)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("record takes no arguments (got %q)", fs.Args())
	}
	if *rotSize < 0 || *rotTime < 0 || *forDur < 0 || *fps < 0 {
		return usagef("sizes, durations and rates must not be negative")
	}
	if *minFree < 1 {
		return usagef("-min-free must be at least 1 MB: recording must never fill the disk")
	}
	pref := v4l2.Preference{FPS: *fps}
	if *pixel != "" {
		p, err := v4l2.ParsePixelFormat(*pixel)
		if err != nil {
			return usagef("-format: %v", err)
		}
		pref.Pixel = p
	}
	if *size != "" {
		var w, h int
		if n, err := fmt.Sscanf(strings.ToLower(*size), "%dx%d", &w, &h); err != nil || n != 2 || w <= 0 || h <= 0 {
			return usagef("-size %q: want WxH, e.g. 640x480", *size)
		}
		pref.Size = image.Pt(w, h)
	}

	log := zerolog.New(zerolog.ConsoleWriter{Out: stderr, NoColor: true, TimeFormat: "15:04:05.000"}).With().Timestamp().Logger()

	var src record.Source
	var transient func(error) bool
	var srcFPS float64
	var cam *v4l2.Camera
	if *source != "" {
		fsrc, err := capture.Open(*source)
		if err != nil {
			return err
		}
		defer fsrc.Close()
		// A recording keeps its recorded times when re-recorded.
		if vf, ok := fsrc.(*capture.VideoFile); ok {
			if ts, err := record.ReadSidecar(record.SidecarPath(*source)); err == nil {
				vf.UseTimestamps(ts)
			}
		}
		src, srcFPS = fsrc, fsrc.Info().FPS
		fmt.Fprintf(stdout, "source:  %s (%dx%d, %.4g fps)\n", *source, fsrc.Info().Size.X, fsrc.Info().Size.Y, srcFPS)
	} else {
		var err error
		cam, err = v4l2.OpenCamera(*camera, pref, v4l2.Options{
			EveryFrame: true, // a recording keeps every frame the camera gives
			OnEvent: func(e v4l2.Event) {
				if e.Kind.Faulty() {
					log.Error().Msg(e.String())
				} else {
					log.Info().Msg(e.String())
				}
			},
		})
		if err != nil {
			return err // names the likely causes
		}
		defer cam.Close()
		src, srcFPS = cam, cam.Mode().FPS
		transient = func(err error) bool { return errors.Is(err, v4l2.ErrStalled) || errors.Is(err, v4l2.ErrGone) }
		fmt.Fprintf(stdout, "camera:  %s\n", cam)
	}
	if srcFPS <= 0 {
		srcFPS = 30
	}
	rec, err := record.New(record.Options{
		Dir:         *out,
		FPS:         srcFPS,
		RotateBytes: *rotSize << 20,
		RotateEvery: *rotTime,
		MinFree:     uint64(*minFree) << 20,
		Log:         &log,
	})
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "output:  %s\n", *out)
	n, copyErr := record.Copy(ctx, src, rec, record.CopyOptions{For: *forDur, Transient: func(err error) bool {
		if transient != nil && transient(err) {
			log.Warn().Err(err).Msg("no frame")
			return true
		}
		return false
	}})
	recErr := rec.Close()
	fmt.Fprintf(stdout, "recorded %d of %d frames in %d clips\n", rec.Frames(), n, len(rec.Files()))
	for _, f := range rec.Files() {
		fmt.Fprintf(stdout, "  %s\n", f)
	}
	if cam != nil {
		st := cam.Stats()
		fmt.Fprintf(stdout, "camera:  %d frames, %d dropped, %d stalls, %d losses, %d reopens, %d corrupt\n",
			st.Frames, st.Drops, st.Stalls, st.Losses, st.Reopens, st.Corrupt)
	}
	if copyErr != nil {
		return copyErr
	}
	if recErr != nil {
		return fmt.Errorf("recording stopped early: %w", recErr)
	}
	if rec.Frames() == 0 {
		return fmt.Errorf("nothing recorded from %s", nameOf(*source, *camera))
	}
	return nil
}

func nameOf(source, camera string) string {
	if source != "" {
		return source
	}
	return camera
}
