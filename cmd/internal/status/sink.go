package status

import (
	"fmt"
	"image"
	"sort"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance"
)

// numStates is the number of guidance states (Seeking … Regaining).
const numStates = int(guidance.Regaining) + 1

// sample is one point of the plotted history.
type sample struct {
	at         time.Time
	offsetPx   float64
	confidence float64
	state      guidance.State
	tracking   bool
	alarm      bool
}

// ring is a fixed-capacity history; the oldest sample is overwritten.
type ring struct {
	buf   []sample
	start int // index of the oldest sample
	n     int
}

func (r *ring) push(s sample) {
	if r.n < len(r.buf) {
		r.buf[(r.start+r.n)%len(r.buf)] = s
		r.n++
		return
	}
	r.buf[r.start] = s
	r.start = (r.start + 1) % len(r.buf)
}

// last returns the newest sample; ok is false when the ring is empty.
func (r *ring) last() (s sample, ok bool) {
	if r.n == 0 {
		return sample{}, false
	}
	return r.buf[(r.start+r.n-1)%len(r.buf)], true
}

// each calls f for the samples from oldest to newest.
func (r *ring) each(f func(sample)) {
	for i := 0; i < r.n; i++ {
		f(r.buf[(r.start+i)%len(r.buf)])
	}
}

// health is one entry set by SetHealth.
type health struct {
	ok      bool
	detail  string
	updated time.Time
}

// Frame records one pipeline result and, when a stream client watches and
// the last JPEG is older than 1/MaxFPS, encodes the annotated image. It
// implements pipeline.Sink; it does not retain r or img. img is a BGR
// CV_8UC3 Mat, or empty when r.Tick is set. Frame never waits for a
// network client and never returns an error: a frame it cannot encode is
// counted in hewline_status_encode_errors_total and the stream keeps the
// previous JPEG. Frame must not be called from more than one goroutine at
// a time (the pipeline calls its sinks in order from one goroutine).
func (s *Server) Frame(r *pipeline.Result, img gocv.Mat) error {
	now := s.now()
	s.record(r, now)
	if r.Tick {
		return nil // no image with a watchdog tick
	}
	s.mu.Lock()
	due := s.streamClients > 0 && (s.jpegAt.IsZero() || now.Sub(s.jpegAt) >= s.minEncodeGap)
	s.mu.Unlock()
	if due {
		s.encode(r, img, now)
	}
	return nil
}

// record updates the counters, the history and the current state.
func (s *Server) record(r *pipeline.Result, now time.Time) {
	s.mu.Lock()
	defer s.mu.Unlock()
	st := r.Est.State
	if int(st) < 0 || int(st) >= numStates {
		st = guidance.Lost // an unknown state is shown as the fail-safe
	}
	if s.haveLast {
		if d := now.Sub(s.lastAt); d > 0 {
			s.stateTime[s.cur.Est.State] += d
		}
	}
	if r.Tick {
		s.ticks++
	} else {
		s.frames++
		if s.haveFrame && r.Info.Index > s.lastIndex+1 {
			s.skipped += uint64(r.Info.Index - s.lastIndex - 1)
		}
		s.lastIndex, s.haveFrame = r.Info.Index, true
		if !r.Captured.IsZero() && !r.Decided.IsZero() && !r.Decided.Before(r.Captured) {
			s.latency.observe(r.Decided.Sub(r.Captured).Seconds())
		}
	}
	if r.Drops > 0 && uint64(r.Drops) > s.drops {
		s.drops = uint64(r.Drops) // the live pipeline's count so far
	}
	if r.Est.Alarm && (!s.haveLast || !s.cur.Est.Alarm) {
		s.alarms++
	}
	s.cur = *r
	s.cur.Est.State = st
	s.cur.Det.Points = nil // not needed here; r's slices must not be retained
	if r.Floor != nil {
		f := *r.Floor
		s.curFloor = &f
	} else {
		s.curFloor = nil
	}
	s.cur.Floor = nil
	s.lastAt, s.haveLast = now, true

	smp := sample{at: now, offsetPx: r.Est.OffsetPx, confidence: r.Est.Confidence,
		state: st, tracking: r.Est.Tracking, alarm: r.Est.Alarm}
	prev, ok := s.hist.last()
	changed := !ok || prev.state != smp.state || prev.alarm != smp.alarm || prev.tracking != smp.tracking
	if changed || now.Sub(prev.at) >= s.sampleGap {
		s.hist.push(smp)
	}
}

// encode copies img, draws the overlay and stores the JPEG in the slot.
func (s *Server) encode(r *pipeline.Result, img gocv.Mat, now time.Time) {
	s.encMu.Lock()
	defer s.encMu.Unlock()
	if s.encClosed {
		return
	}
	if img.Empty() {
		return // nothing to show; the stream keeps the previous JPEG
	}
	if img.Type() != gocv.MatTypeCV8UC3 || img.Cols() < 1 || img.Rows() < 1 {
		s.countEncodeError(fmt.Errorf("frame %d: want a BGR CV_8UC3 image, got type %v %dx%d",
			r.Info.Index, img.Type(), img.Cols(), img.Rows()))
		return
	}
	img.CopyTo(&s.work)
	pipeline.Annotate(&s.work, r)
	buf, err := gocv.IMEncodeWithParams(gocv.JPEGFileExt, s.work, []int{gocv.IMWriteJpegQuality, s.quality})
	if err != nil {
		s.countEncodeError(fmt.Errorf("frame %d: jpeg: %w", r.Info.Index, err))
		return
	}
	b := append([]byte(nil), buf.GetBytes()...) // own copy: buf is freed below
	buf.Close()
	s.mu.Lock()
	s.jpeg, s.jpegAt, s.jpegIndex = b, now, r.Info.Index
	s.jpegSize = image.Pt(s.work.Cols(), s.work.Rows())
	s.jpegSeq++
	close(s.jpegReady)
	s.jpegReady = make(chan struct{})
	s.mu.Unlock()
}

func (s *Server) countEncodeError(err error) {
	s.mu.Lock()
	s.encodeErrors++
	s.lastEncodeErr = err.Error()
	s.mu.Unlock()
}

// SetHealth records the health of a part of the run (e.g. "camera",
// "speaker", "controller"), shown on the page and as hewline_health. The
// run loop calls it whenever a part's health changes; it is safe for
// concurrent use.
func (s *Server) SetHealth(name string, ok bool, detail string) {
	s.mu.Lock()
	s.health[name] = health{ok: ok, detail: detail, updated: s.now()}
	s.mu.Unlock()
}

// SetDrops sets the number of frames the run dropped so far (the live
// pipeline's Stats.Drops), exported as hewline_drops_total. Frame does the
// same from each Result's Drops, so a run that passes the Server as a sink
// needs no call. A counter
// never goes down: a smaller value than before is ignored. Safe for
// concurrent use.
func (s *Server) SetDrops(total int) {
	s.mu.Lock()
	if total > 0 && uint64(total) > s.drops {
		s.drops = uint64(total)
	}
	s.mu.Unlock()
}

// SetSourceDrops sets the number of frames the source dropped before the
// pipeline saw them (a camera reader keeping only the freshest frame),
// exported as hewline_source_drops_total. Like SetDrops it never goes
// down. Safe for concurrent use.
func (s *Server) SetSourceDrops(total uint64) {
	s.mu.Lock()
	if total > s.sourceDrops {
		s.sourceDrops = total
	}
	s.mu.Unlock()
}

// healthNames returns the health entry names in order; s.mu must be held.
func (s *Server) healthNames() []string {
	names := make([]string, 0, len(s.health))
	for n := range s.health {
		names = append(names, n)
	}
	sort.Strings(names)
	return names
}
