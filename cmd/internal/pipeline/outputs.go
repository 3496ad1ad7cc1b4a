package pipeline

import (
	"errors"
	"math"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/audio"
	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/record"
	"github.com/hewline/hewline/guidance/ctlstream"
	"github.com/hewline/hewline/guidance/haptic"
)

// AudioSink drives an audio.Player from each frame's cue decision. In
// replay it renders the sound up to each frame's time first (Update), so a
// WAV file's timing follows the frame timestamps sample for sample; in live
// use (Live true) the player renders in real time on its own goroutine and
// the sink only hands it the cue.
type AudioSink struct {
	Player *audio.Player
	// FullScalePx is the offset (px) that maps to the full cue (±1); the
	// heading's full scale is FullScaleDeg. Defaults: a quarter of the
	// frame width, 20°.
	FullScalePx, FullScaleDeg float64
	// FullScaleMM, when set and the frame has floor values, sets the cue
	// in millimetres on the floor instead (e.g. 150 mm = full cue).
	FullScaleMM float64
	Live        bool
	last        time.Duration
}

// Cue converts a frame's decision to the audio cue.
func (s *AudioSink) Cue(r *Result) audio.Cue {
	fs := s.FullScalePx
	if fs <= 0 {
		fs = float64(r.Info.Size.X) / 4
	}
	fd := s.FullScaleDeg
	if fd <= 0 {
		fd = 20
	}
	c := audio.Cue{Alarm: r.Cue.Alarm, Guide: r.Cue.Guide}
	if c.Guide {
		c.Offset = clamp1(r.Cue.Offset / fs)
		c.Heading = clamp1(r.Cue.Heading / fd)
		if s.FullScaleMM > 0 && r.Floor != nil {
			c.Offset = clamp1(r.Floor.OffsetMM / s.FullScaleMM)
			c.Heading = clamp1(r.Floor.HeadingDeg / fd)
		}
	}
	return c
}

// Frame implements Sink. It returns the player's error when the last alarm
// channel has failed and one was required.
func (s *AudioSink) Frame(r *Result, _ gocv.Mat) error {
	c := s.Cue(r)
	if s.Live {
		s.Player.Set(c)
		return s.Player.Err()
	}
	s.last = r.Info.T
	return s.Player.Update(r.Info.T, c)
}

// Finish renders the last frame's cue for one more frame interval (replay).
func (s *AudioSink) Finish(tail time.Duration) error {
	if s.Live {
		return nil
	}
	return s.Player.Advance(s.last + tail)
}

func clamp1(x float64) float64 {
	if math.IsNaN(x) {
		return 0
	}
	return math.Max(-1, math.Min(1, x))
}

// StreamSink sends one controller-stream message per frame. Untrusted
// estimates go out without offsets (ctlstream.FromEstimate), and floor
// values are added only while tracking.
type StreamSink struct {
	Sender *ctlstream.Sender
	// AheadMM and LookAheadMM feed the pure-pursuit hint when calibrated.
	AheadMM, LookAheadMM float64
	// Refused counts sends after which the receiver was found not to be
	// listening; the run goes on (the fail-safe is the receiver's duty
	// when it hears nothing) and the count goes into the summary.
	Refused int
}

// Frame implements Sink.
func (s *StreamSink) Frame(r *Result, _ gocv.Mat) error {
	m := ctlstream.FromEstimate(r.Est, r.Info.Index)
	m.CapturedAt = r.Captured
	if r.Floor != nil {
		if err := m.SetFloor(ctlstream.Floor{OffsetMM: r.Floor.OffsetMM, HeadingDeg: r.Floor.HeadingDeg, AheadMM: s.AheadMM, LookAheadMM: s.LookAheadMM}); err != nil {
			return err
		}
	}
	err := s.Sender.Send(m)
	if errors.Is(err, ctlstream.ErrRefused) {
		s.Refused++
		return nil
	}
	return err
}

// HapticSink hands each frame's cue decision to a vibration cue player.
// The Vibrator runs its own patterns in time (its Run); the sink only sets
// the cue, from trusted estimates alone (r.Cue).
type HapticSink struct {
	V *haptic.Vibrator
	// FullScalePx is the offset that maps to the strongest cue; default a
	// quarter of the frame width.
	FullScalePx float64
	// OnError is told of a failing vibration driver (it must report it
	// loudly); the run goes on, since the alarm has its own channels.
	OnError  func(error)
	Failures int
}

// Frame implements Sink.
func (s *HapticSink) Frame(r *Result, _ gocv.Mat) error {
	fs := s.FullScalePx
	if fs <= 0 {
		fs = float64(r.Info.Size.X) / 4
	}
	if err := s.V.Cue(haptic.CueFrom(r.Cue, fs)); err != nil {
		s.Failures++
		if s.OnError != nil && (s.Failures == 1 || s.Failures%300 == 0) {
			s.OnError(err)
		}
	}
	return nil
}

// RecordSink records every processed frame for replay. The frame's time in
// the recording is the time the tracker used (Result.TrackT), so that a
// replay of the recording gives the tracker the same times and repeats the
// live run's decisions. Recording runs on its own goroutine (Background):
// a slow disk drops recorded frames (counted) but never slows guidance,
// and a full disk stops the recording, never the run.
//
// The tracker's other events (watchdog ticks and faults, in
// Result.Info.Before) go into the sidecar with the frame after them; when
// the recorder drops a frame, its events move on to the next recorded one,
// so a replay still repeats every alarm the live run raised.
type RecordSink struct {
	B       *record.Background
	n       int
	pending []capture.TrackerEvent // events of frames the recorder dropped
}

// Frame implements Sink.
func (s *RecordSink) Frame(r *Result, img gocv.Mat) error {
	if r.Tick || img.Empty() {
		return nil
	}
	info := r.Info
	info.Index, info.T = s.n, r.TrackT
	if len(s.pending) > 0 {
		info.Before = append(append([]capture.TrackerEvent(nil), s.pending...), info.Before...)
	}
	s.n++
	drops := s.B.Drops()
	_ = s.B.Write(img, info) // failures are kept in B.Err(); guidance goes on
	if s.B.Drops() != drops {
		s.pending = info.Before
	} else {
		s.pending = nil
	}
	return nil
}
