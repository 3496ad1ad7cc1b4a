package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"slices"
	"strings"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/audio"
	"github.com/hewline/hewline/capture/record"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/cmd/internal/status"
)

// statusTokenEnv names the environment variable that may hold the status
// page's access token (kept out of the process list, unlike a flag value).
const statusTokenEnv = "HEWLINE_STATUS_TOKEN"

// statusFlags are run's options for the status page.
type statusFlags struct {
	addr      *string
	remote    *bool
	tokenFile *string
}

func addStatusFlags(fs *flag.FlagSet) statusFlags {
	return statusFlags{
		addr: fs.String("status", status.DefaultAddr, "serve the status page on `ADDR` (host:port; \"off\" for none). Loopback only unless -status-remote"),
		remote: fs.Bool("status-remote", false, "allow -status on a non-loopback address; needs an access token of at least "+
			fmt.Sprint(status.MinTokenLen)+" characters (-status-token-file or $"+statusTokenEnv+")"),
		tokenFile: fs.String("status-token-file", "", "read the status page's access `TOKEN` from this file (first line); every request must then carry it"),
	}
}

// newStatus checks the status options and returns the server (not yet
// listening), or nil for -status off. A non-loopback address without
// -status-remote and a token is refused with a usage error that says what
// to do.
func (f statusFlags) newStatus() (*status.Server, error) {
	addr := strings.TrimSpace(*f.addr)
	if addr == "" || strings.EqualFold(addr, "off") {
		return nil, nil
	}
	token := os.Getenv(statusTokenEnv)
	if *f.tokenFile != "" {
		b, err := os.ReadFile(*f.tokenFile)
		if err != nil {
			return nil, usagef("-status-token-file: %v", err)
		}
		token, _, _ = strings.Cut(string(b), "\n")
		if token = strings.TrimSpace(token); token == "" {
			return nil, usagef("-status-token-file %s is empty", *f.tokenFile)
		}
	}
	srv, err := status.New(status.Options{Addr: addr, Token: token, AllowRemote: *f.remote})
	switch {
	case errors.Is(err, status.ErrRemoteNeedsToken) && !*f.remote:
		return nil, usagef("-status %s is not a loopback address: the status page shows the camera to anyone who can reach it. "+
			"Add -status-remote and an access token (-status-token-file FILE or $%s, at least %d characters), or use 127.0.0.1:PORT", addr, statusTokenEnv, status.MinTokenLen)
	case errors.Is(err, status.ErrRemoteNeedsToken):
		return nil, usagef("-status-remote needs an access token: -status-token-file FILE or $%s (at least %d characters)", statusTokenEnv, status.MinTokenLen)
	case err != nil:
		return nil, usagef("%v", err)
	}
	return srv, nil
}

// healthSetter is the part of the status server the run's health reports
// use; nil-safe through setHealth.
type healthSetter interface {
	SetHealth(name string, ok bool, detail string)
}

// statusBoard is what the output watch reports to: health and the
// source's drop count (a *status.Server).
type statusBoard interface {
	healthSetter
	SetSourceDrops(total uint64)
}

func setHealth(h healthSetter, name string, ok bool, detail string) {
	if h != nil {
		h.SetHealth(name, ok, detail)
	}
}

// cameraEvents returns the Supervisor's event handler for run: every event
// is logged (faulty ones marked FAIL-SAFE) and the camera's health follows
// it on the status page. It is called from the Supervisor's goroutines.
func cameraEvents(stderr io.Writer, h healthSetter, device string) func(v4l2.Event) {
	return func(e v4l2.Event) {
		if e.Kind.Faulty() {
			fmt.Fprintf(stderr, "hewline run: %s: FAIL-SAFE\n", e)
		} else {
			fmt.Fprintf(stderr, "hewline run: %s\n", e)
		}
		switch e.Kind {
		case v4l2.EventStalled, v4l2.EventGone, v4l2.EventOpenFailed:
			setHealth(h, "camera", false, device+": "+strings.TrimPrefix(e.String(), "camera "))
		case v4l2.EventOpened, v4l2.EventResumed:
			setHealth(h, "camera", true, device+": "+strings.TrimPrefix(e.String(), "camera "))
		}
	}
}

// outputWatch is the last sink of a live run. It notices at once when the
// recording stops (the disk filled, a write failed) and says so — the run
// and its guidance go on — and, every Every of run time, reports the health
// of the outputs (speaker, controller stream, vibration, recording) to the
// status page. It runs on the sinks' goroutine, so it may read the other
// sinks' counters.
type outputWatch struct {
	Log    io.Writer
	Health statusBoard // nil: no status page
	Every  time.Duration
	// SourceDrops, when set, gives the frames the source dropped before
	// the pipeline (the camera reader's count).
	SourceDrops func() uint64
	// Speaker: the speaker was asked for; Player tells whether it still works.
	Speaker bool
	Player  *audio.Player
	Stream  *pipeline.StreamSink
	Haptic  *pipeline.HapticSink
	Rec     *record.Background

	recStopped           bool
	last                 time.Time
	refused, hapticFails int
}

// Frame implements pipeline.Sink; it never fails the run.
func (w *outputWatch) Frame(r *pipeline.Result, _ gocv.Mat) error {
	if w.Rec != nil && !w.recStopped {
		if err := w.Rec.Err(); err != nil {
			w.recStopped = true
			fmt.Fprintf(w.Log, "hewline run: RECORDING STOPPED after %d frames (guidance goes on): %v\n", w.Rec.Recorded(), err)
			w.report()
		}
	}
	if w.Health == nil {
		return nil
	}
	if now := r.Decided; w.last.IsZero() || now.Sub(w.last) >= w.Every || now.Before(w.last) {
		w.last = now
		w.report()
	}
	return nil
}

// report sends every output's health to the status page.
func (w *outputWatch) report() {
	h := w.Health
	if h == nil {
		return
	}
	if w.SourceDrops != nil {
		h.SetSourceDrops(w.SourceDrops())
	}
	if w.Speaker {
		if chans := w.Player.Channels(true); slices.Contains(chans, "speaker") {
			setHealth(h, "speaker", true, "alarm channel")
		} else {
			setHealth(h, "speaker", false, "LOST: the alarm cannot sound on it")
		}
	}
	if w.Stream != nil {
		if n := w.Stream.Refused; n > w.refused {
			setHealth(h, "controller stream", false, fmt.Sprintf("receiver not listening (%d sends refused)", n))
		} else {
			setHealth(h, "controller stream", true, "sending")
		}
		w.refused = w.Stream.Refused
	}
	if w.Haptic != nil {
		if n := w.Haptic.Failures; n > w.hapticFails {
			setHealth(h, "vibration", false, fmt.Sprintf("driver failing (%d cues failed)", n))
		} else {
			setHealth(h, "vibration", true, "cueing")
		}
		w.hapticFails = w.Haptic.Failures
	}
	if w.Rec != nil {
		if err := w.Rec.Err(); err != nil {
			setHealth(h, "recording", false, "STOPPED: "+err.Error())
		} else {
			setHealth(h, "recording", true, fmt.Sprintf("%d frames, %d dropped by the encoder", w.Rec.Recorded(), w.Rec.Drops()))
		}
	}
}
