package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/audio"
	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/record"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/ctlstream"
	"github.com/hewline/hewline/guidance/haptic"
	"github.com/hewline/hewline/guidance/report"
	"github.com/hewline/hewline/guidance/tracklog"
)

func init() {
	register(&command{
		name:    "run",
		summary: "the live loop: camera (or a paced recording) → detection → guidance → cues, alarm, controller stream and track log",
		run:     runRun,
	})
}

// liveSource is what run reads from: a camera or a paced file.
type liveSource interface {
	Read(dst *gocv.Mat) (capture.FrameInfo, error)
	Info() capture.SourceInfo
	Close() error
}

func runRun(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("run", "[options]", stderr)
	camera := fs.String("camera", "", "camera `DEVICE` (/dev/videoN or a /dev/v4l/by-id/... name)")
	source := fs.String("source", "", "rehearse on a recorded `FILE` (or image folder), paced at its frame rate, instead of a camera")
	track := fs.String("track", "", "track log `FILE` (default run-YYYYmmdd-HHMMSS.track.ndjson in the current folder)")
	speaker := fs.Bool("speaker", true, "sound cues and the alarm on the speaker (ALSA default device)")
	speakerStall := fs.Duration("speaker-stall", 250*time.Millisecond, "count the speaker as lost when it takes no samples for this long")
	requireAlarm := fs.Bool("require-alarm", true, "exit with code 3 when no alarm channel works (speaker lost and nothing else can sound the alarm)")
	forDur := fs.Duration("for", 0, "stop after this long (0 = until interrupted or the source ends)")
	vibSerial := fs.String("vibrate-serial", "", "vibration cues to a motor driver on serial `PORT` (line protocol \"L n R n\")")
	vibGPIO := fs.String("vibrate-gpio", "", "vibration cues on two GPIO `PINS` \"LEFT,RIGHT\" (Linux GPIO character device)")
	logRotMB := fs.Int64("track-rotate-mb", 64, "start a new track-log file (chained to the last) after this many MB")
	logRot := fs.Duration("track-rotate", time.Hour, "start a new track-log file after this much run time")
	recDir := fs.String("record", "", "record the frames guidance saw to `DIR` (MJPEG AVI + per-frame times) for replay")
	recSize := fs.Int64("record-rotate-mb", 1024, "start a new recording file after about this many MB")
	recTime := fs.Duration("record-rotate", 10*time.Minute, "start a new recording file after this long")
	cueMM := fs.Float64("cue-full-scale-mm", 0, "with -calib: the floor offset in `MM` that gives the strongest cue (0 = a quarter of the frame width in pixels)")
	watchdog := fs.Duration("watchdog", 20*time.Millisecond, "tick the fail-safe this often when no frame comes")
	camStall := fs.Duration("camera-stall", 250*time.Millisecond, "raise the fail-safe at once when the camera sends no frame for this long (it is reopened after 2 s)")
	sf := addStatusFlags(fs)
	o := replayFlags(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := o.applySite(fs); err != nil {
		return err
	}
	// The site file's values, with the flags the user set on top.
	site := o.site
	*speaker, *requireAlarm = site.Cues.Speaker, site.Cues.RequireAlarm
	if *source == "" {
		*camera = site.Camera.Device // a rehearsal on a file ignores the site's camera
	}
	*vibSerial, *vibGPIO = site.Cues.VibrateSerial, site.Cues.VibrateGPIO
	if *recDir == "" {
		*recDir = site.Outputs.RecordDir
	}
	if *track == "" && site.Outputs.TrackDir != "" {
		*track = filepath.Join(site.Outputs.TrackDir, "run-"+time.Now().Format("20060102-150405")+".track.ndjson")
	}
	if fs.NArg() > 0 {
		return usagef("run takes no arguments (got %q)", fs.Args())
	}
	if (*camera == "") == (*source == "") {
		return usagef("give exactly one of -camera DEVICE or -source FILE")
	}
	// The status page's address and token are checked before anything
	// starts: a page open to the network without a token is refused.
	srv, err := sf.newStatus()
	if err != nil {
		return err
	}
	var health statusBoard
	if srv != nil {
		health = srv
		defer srv.Close()
	}
	fmt.Fprintln(stdout, safetyShort)
	fmt.Fprintln(stdout)
	if site.File() != "" {
		fmt.Fprintf(stdout, "site file:   %s\n", site.File())
	}
	for _, w := range site.Warnings() {
		fmt.Fprintf(stdout, "WARNING:     %s\n", w)
	}

	// Start-up checks: say what was found before anything moves.
	if srv != nil {
		statusExplicit := false
		fs.Visit(func(f *flag.Flag) { statusExplicit = statusExplicit || f.Name == "status" })
		if err := srv.Start(ctx); err != nil {
			if statusExplicit {
				return err
			}
			// The default page is a convenience, not a safety function:
			// a busy port must not keep the vehicle from guiding.
			fmt.Fprintf(stdout, "status page: NOT AVAILABLE: %v (-status ADDR to choose another)\n", err)
			srv.Close()
			srv, health = nil, nil
		} else {
			fmt.Fprintf(stdout, "status page: %s\n", statusURL(srv.Addr(), *sf.remote))
		}
	} else {
		fmt.Fprintln(stdout, "status page: off")
	}
	tcfg, err := o.trackerConfig()
	if err != nil {
		return usagef("%v", err)
	}
	var src liveSource
	var transient func(error) bool
	var sourceDrops func() uint64
	if *camera != "" {
		if *camStall <= 0 {
			return usagef("-camera-stall %v must be positive", *camStall)
		}
		cam, err := v4l2.OpenCamera(*camera, site.CameraPreference(), v4l2.Options{StallAfter: *camStall, OnEvent: cameraEvents(stderr, health, *camera)})
		if err != nil {
			return fmt.Errorf("camera %s: %w", *camera, err)
		}
		src = cam
		sourceDrops = func() uint64 { return cam.Stats().Drops }
		transient = func(err error) bool { return errors.Is(err, v4l2.ErrStalled) || errors.Is(err, v4l2.ErrGone) }
		fmt.Fprintf(stdout, "camera:      %s; fail-safe when no frame for %v\n", cam, *camStall)
	} else {
		f, err := capture.Open(*source)
		if err != nil {
			return err
		}
		src = newPaced(f, time.Now)
		setHealth(health, "source", true, "rehearsal on "+*source+" (not a camera)")
		fmt.Fprintf(stdout, "source:      %s (%dx%d at %.4g fps, paced; a rehearsal, not a camera)\n", *source, f.Info().Size.X, f.Info().Size.Y, f.Info().FPS)
	}
	defer src.Close()
	info := src.Info()

	var floor pipeline.FloorMapper
	if o.calib != "" {
		fm, err := loadFloor(o.calib, info.Size.X, info.Size.Y)
		if err != nil {
			return err
		}
		floor = fm
		fmt.Fprintf(stdout, "calibration: %s (floor values in mm)\n", o.calib)
	} else {
		fmt.Fprintln(stdout, "calibration: none (offsets in image pixels only)")
	}

	// Audio: speaker and/or WAV, one player rendering in real time.
	var chans []audio.Channel
	if *speaker {
		sp, err := audio.NewSpeakerStall(48000, audio.MaxBuffer, *speakerStall)
		if err != nil {
			fmt.Fprintf(stdout, "speaker:     NOT AVAILABLE: %v\n", err)
		} else {
			chans = append(chans, audio.Channel{Name: "speaker", Sink: sp, Alarm: true})
			fmt.Fprintln(stdout, "speaker:     ok (alarm channel)")
		}
	}
	if o.wav != "" {
		w, err := audio.NewWAVSink(o.wav, 48000)
		if err != nil {
			return err
		}
		chans = append(chans, audio.Channel{Name: o.wav, Sink: w})
		fmt.Fprintf(stdout, "audio file:  %s (a record, not an alarm channel)\n", o.wav)
	}
	syn, err := audio.NewSynth(48000, site.Audio(), audio.DefaultAlarm())
	if err != nil {
		return err
	}
	player, err := audio.NewPlayer(syn, audio.PlayerConfig{RequireAlarm: *requireAlarm}, chans...)
	if err != nil {
		fmt.Fprintf(stdout, "alarm:       NO ALARM CHANNEL\n")
		return err // *audio.NoAlarmChannelError: exit code 3
	}
	defer player.Close()
	if alarms := player.Channels(true); len(alarms) > 0 {
		fmt.Fprintf(stdout, "alarm:       on %s; fail-safe after %v without a trusted measurement\n", strings.Join(alarms, ", "), tcfg.FailSafeAfter)
	} else {
		fmt.Fprintf(stdout, "alarm:       WARNING: no alarm channel (-require-alarm=false); fail-safe after %v\n", tcfg.FailSafeAfter)
	}

	var sender *ctlstream.Sender
	if o.stream != "" {
		sender, err = ctlstream.NewUDP(o.stream, site.StreamOptions())
		if err != nil {
			return err
		}
		fmt.Fprintf(stdout, "controller:  NDJSON over UDP to %s, heartbeat every %v\n", o.stream, ctlstream.DefaultHeartbeat)
	} else {
		fmt.Fprintln(stdout, "controller:  none")
	}

	var vib *haptic.Vibrator
	switch {
	case *vibSerial != "" && *vibGPIO != "":
		return usagef("give at most one of -vibrate-serial and -vibrate-gpio")
	case *vibSerial != "":
		d, err := haptic.OpenSerial(*vibSerial, 115200)
		if err != nil {
			return fmt.Errorf("vibration: %w", err)
		}
		vib = haptic.NewVibrator(d, haptic.NewMapper(), time.Now)
		fmt.Fprintf(stdout, "vibration:   motor driver on %s\n", *vibSerial)
	case *vibGPIO != "":
		pins := strings.Split(*vibGPIO, ",")
		if len(pins) != 2 {
			return usagef("-vibrate-gpio wants LEFT,RIGHT, got %q", *vibGPIO)
		}
		d, err := haptic.OpenGPIO(pins[0], pins[1], false)
		if err != nil {
			return fmt.Errorf("vibration: %w", err)
		}
		vib = haptic.NewVibrator(d, haptic.NewMapper(), time.Now)
		fmt.Fprintf(stdout, "vibration:   GPIO %s (left) and %s (right)\n", pins[0], pins[1])
	default:
		fmt.Fprintln(stdout, "vibration:   none")
	}
	if vib != nil {
		defer vib.Close()
	}

	var rec *record.Background
	if *recDir != "" {
		r, err := record.New(record.Options{Dir: *recDir, FPS: info.FPS, RotateBytes: *recSize << 20, RotateEvery: *recTime})
		if err != nil {
			return fmt.Errorf("record: %w", err)
		}
		rec = record.NewBackground(r, 8)
		fmt.Fprintf(stdout, "recording:   %s (rotating every %d MB or %v; stops, never the run, when the disk fills)\n", *recDir, *recSize, *recTime)
	}

	follow, err := followMode(o.follow)
	if err != nil {
		return err
	}
	logPath := *track
	if logPath == "" {
		logPath = "run-" + time.Now().Format("20060102-150405") + ".track.ndjson"
	}
	if err := os.MkdirAll(filepath.Dir(logPath), 0o755); err != nil {
		return err
	}
	lw, err := tracklog.NewRotatingWriter(logPath, tracklog.Header{
		Tool: "hewline " + version, Source: info.Name, Kind: info.Kind, Width: info.Size.X, Height: info.Size.Y, FPS: info.FPS,
		Follow: follow, Started: time.Now().UTC().Format(time.RFC3339),
		Settings: map[string]any{"fail_safe_after_s": tcfg.FailSafeAfter.Seconds(), "reacquire_for_s": tcfg.ReacquireFor.Seconds(),
			"tracker": tcfg.String(), "detector": o.vision, "calibration": o.calib, "alarm_channels": player.Channels(true), "live": true},
	}, tracklog.Rotation{MaxBytes: *logRotMB << 20, MaxSpan: *logRot})
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "track log:   %s\n\n", logPath)

	det, closeDet, err := o.newDetector()
	if err != nil {
		return err
	}
	defer closeDet()
	if follow == followLane {
		fmt.Fprintln(stdout, "detector:    lane (two boundary lines; the centre is followed)")
	} else {
		fmt.Fprintf(stdout, "detector:    classical, CNN fallback %s\n", modelName(o))
	}
	tr, err := guidance.NewTracker(tcfg)
	if err != nil {
		return err
	}

	runCtx, cancel := context.WithCancel(ctx)
	defer cancel()
	if *forDur > 0 {
		runCtx, cancel = context.WithTimeout(runCtx, *forDur)
		defer cancel()
	}
	// The player renders in real time; losing the last alarm channel
	// stops the run (exit 3) rather than go on with a silent alarm.
	playerErr := make(chan error, 1)
	go func() {
		err := player.Run(runCtx)
		if err != nil {
			cancel()
		}
		playerErr <- err
	}()
	if sender != nil {
		tick := time.NewTicker(ctlstream.DefaultHeartbeat / 2)
		defer tick.Stop()
		go sender.Run(runCtx, tick.C, func(err error) { fmt.Fprintf(stderr, "hewline run: controller stream: %v\n", err) })
	}

	if vib != nil {
		vt := time.NewTicker(haptic.DefaultTick)
		defer vt.Stop()
		go vib.Run(runCtx, vt.C, func(err error) { fmt.Fprintf(stderr, "hewline run: VIBRATION CUES FAILED: %v\n", err) })
	}
	lat := &latencySink{out: stdout, budget: frameBudget(info.FPS), every: time.Minute}
	sinks := []pipeline.Sink{&pipeline.LogSink{W: lw}, &pipeline.AudioSink{Player: player, Live: true, FullScaleMM: *cueMM}, lat}
	var stream *pipeline.StreamSink
	if sender != nil {
		stream = &pipeline.StreamSink{Sender: sender}
		sinks = append(sinks, stream)
	}
	watch := &outputWatch{Log: stderr, Health: health, Every: 500 * time.Millisecond, Speaker: *speaker, Player: player, Stream: stream, Rec: rec, SourceDrops: sourceDrops}
	if rec != nil {
		sinks = append(sinks, &pipeline.RecordSink{B: rec})
	}
	if vib != nil {
		watch.Haptic = &pipeline.HapticSink{V: vib, OnError: func(err error) {
			fmt.Fprintf(stderr, "hewline run: VIBRATION CUES FAILED (the alarm goes on its other channels): %v\n", err)
		}}
		sinks = append(sinks, watch.Haptic)
	}
	if srv != nil {
		sinks = append(sinks, srv)
	}
	sinks = append(sinks, watch)
	st, runErr := pipeline.Run(runCtx, src, pipeline.Config{
		Detector: det, Tracker: tr, Floor: floor, Sinks: sinks,
		Live: true, Watchdog: *watchdog, Transient: transient,
	})

	// Shut down: outputs quiet and inert first, then the files.
	player.Halt()
	if vib != nil {
		vib.Halt()
	}
	if sender != nil {
		sender.Halt("hewline stopped")
	}
	cancel()
	pErr := <-playerErr
	end := "eof"
	switch {
	case pErr != nil:
		end, runErr = "error: "+pErr.Error(), pErr
	case errors.Is(runErr, context.Canceled) || errors.Is(runErr, context.DeadlineExceeded):
		end, runErr = "interrupted", nil
	case runErr != nil:
		end = "error: " + runErr.Error()
	}
	if rec != nil {
		rerr := rec.Close()
		if rerr == nil {
			rerr = rec.Err()
		}
		if rerr != nil {
			fmt.Fprintf(stderr, "hewline run: recording: %v\n", rerr)
		}
		fmt.Fprintf(stdout, "recording:   %d frames in %s (%d dropped by the recorder)\n", rec.Recorder().Frames(), strings.Join(rec.Recorder().Files(), ", "), rec.Drops())
	}
	extra := map[string]float64{"drops": float64(st.Drops), "faults": float64(st.Faults), "watchdog_ticks": float64(st.Ticks), "budget_missed": float64(lat.missed)}
	for k, v := range lat.percentiles() {
		extra[k] = v
	}
	if sourceDrops != nil {
		n := sourceDrops()
		extra["camera_drops"] = float64(n)
		fmt.Fprintf(stdout, "camera:      %d stale frames dropped by the camera reader\n", n)
	}
	if err := lw.Close(end, extra); err != nil && runErr == nil {
		runErr = err
	}
	fmt.Fprintf(stdout, "stopped (%s): %d frames, %d dropped, %d faults, %d over the frame budget; track log %s\n", end, st.Frames, st.Drops, st.Faults, lat.missed, strings.Join(lw.Files(), ", "))
	return runErr
}

// statusURL is the page's address as the user should open it.
func statusURL(addr string, remote bool) string {
	u := "http://" + addr + "/"
	if host, port, err := net.SplitHostPort(addr); err == nil {
		if ip := net.ParseIP(host); ip != nil && ip.IsUnspecified() {
			u = "http://<this computer's address>:" + port + "/ on every interface"
		}
	}
	if remote {
		return u + " (open to the network; every request needs the access token)"
	}
	return u + " (this computer only)"
}

func frameBudget(fps float64) time.Duration {
	if fps <= 0 {
		fps = 30
	}
	return time.Duration(float64(time.Second) / fps)
}

// paced delivers a file's frames no faster than their timestamps, as a
// camera would, to rehearse live operation on a recording.
type paced struct {
	capture.FileSource
	now   func() time.Time
	start time.Time
}

func newPaced(f capture.FileSource, now func() time.Time) *paced {
	return &paced{FileSource: f, now: now}
}

func (p *paced) Read(dst *gocv.Mat) (capture.FrameInfo, error) {
	fi, err := p.FileSource.Read(dst)
	if err != nil {
		return fi, err
	}
	if p.start.IsZero() {
		p.start = p.now().Add(-fi.T)
	}
	if d := p.start.Add(fi.T).Sub(p.now()); d > 0 {
		time.Sleep(d)
	}
	return fi, nil
}

// latencySink measures read-to-decision time per frame, warns when the
// frame budget is missed and prints a summary every minute.
type latencySink struct {
	out    io.Writer
	budget time.Duration
	every  time.Duration
	last   time.Time
	window []float64
	all    []float64
	missed int
}

func (s *latencySink) Frame(r *pipeline.Result, _ gocv.Mat) error {
	if r.Tick || r.Captured.IsZero() {
		return nil
	}
	d := r.Decided.Sub(r.Captured)
	ms := float64(d.Microseconds()) / 1000
	s.window = append(s.window, ms)
	if len(s.all) < 1<<20 {
		s.all = append(s.all, ms)
	}
	if d > s.budget {
		s.missed++
		if s.missed == 1 || s.missed%100 == 0 {
			fmt.Fprintf(s.out, "warning: frame %d took %.1f ms from read to decision, over the %.1f ms frame budget (%d so far)\n", r.Info.Index, ms, float64(s.budget.Microseconds())/1000, s.missed)
		}
	}
	now := r.Decided
	if s.last.IsZero() {
		s.last = now
	}
	if now.Sub(s.last) >= s.every {
		p := pct3(s.window)
		fmt.Fprintf(s.out, "%s: %d frames, decision latency p50 %.1f ms p95 %.1f ms max %.1f ms, state %s\n", now.Format("15:04:05"), len(s.window), p[0], p[1], p[2], r.Est.State)
		s.window, s.last = s.window[:0], now
	}
	return nil
}

func (s *latencySink) percentiles() map[string]float64 {
	if len(s.all) == 0 {
		return nil
	}
	p := pct3(s.all)
	return map[string]float64{"decision_ms_p50": p[0], "decision_ms_p95": p[1], "decision_ms_max": p[2]}
}

func pct3(xs []float64) [3]float64 {
	if len(xs) == 0 {
		return [3]float64{}
	}
	s := append([]float64(nil), xs...)
	sort.Float64s(s)
	return [3]float64{report.NearestRank(s, 50), report.NearestRank(s, 95), s[len(s)-1]}
}
