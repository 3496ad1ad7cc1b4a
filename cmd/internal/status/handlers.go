package status

import (
	_ "embed"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net/http"
	"strconv"
	"time"

	"github.com/hewline/hewline/guidance"
)

//go:embed page.html
var pageHTML []byte

func (s *Server) servePage(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	// The page loads nothing from elsewhere; say so to the browser too.
	w.Header().Set("Content-Security-Policy", "default-src 'self'; img-src 'self'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; connect-src 'self'")
	w.Write(pageHTML)
}

// State is the body of /state.json.
type State struct {
	// Now is the server's time, Unix seconds.
	Now float64 `json:"now"`
	// AgeS is the time since the last result (frame or watchdog tick);
	// Stale is AgeS > StaleAfter, or no result yet.
	AgeS  float64 `json:"age_s"`
	Stale bool    `json:"stale"`
	Frame int     `json:"frame"`
	Tick  bool    `json:"tick"`
	// State is the tracking state (seeking, holding, coasting, lost,
	// regaining); Tracking and Alarm as in guidance.Estimate.
	State      string   `json:"state"`
	Tracking   bool     `json:"tracking"`
	Alarm      bool     `json:"alarm"`
	Reason     string   `json:"reason"`
	OffsetPx   *float64 `json:"offset_px"` // null unless tracking
	HeadingDeg *float64 `json:"heading_deg"`
	Confidence float64  `json:"confidence"`
	OffsetMM   *float64 `json:"offset_mm"` // null unless tracking and calibrated
	Frames     uint64   `json:"frames"`
	Ticks      uint64   `json:"ticks"`
	Drops      uint64   `json:"drops"`
	// SourceDrops: frames the camera reader dropped as stale.
	SourceDrops uint64   `json:"source_drops"`
	Skipped     uint64   `json:"skipped"`
	Alarms      uint64   `json:"alarms"`
	Health      []Health `json:"health"`
	// StreamFrame is the frame index of the latest JPEG (-1 for none).
	StreamFrame int     `json:"stream_frame"`
	History     History `json:"history"`
}

// Health is one part's health in /state.json.
type Health struct {
	Name   string  `json:"name"`
	OK     bool    `json:"ok"`
	Detail string  `json:"detail"`
	AgeS   float64 `json:"age_s"`
}

// History is the plotted series, oldest first. T is seconds before Now
// (≤ 0); Offset is null where the tracker was not tracking.
type History struct {
	SpanS    float64    `json:"span_s"`
	T        []float64  `json:"t"`
	Offset   []*float64 `json:"offset"`
	Conf     []float64  `json:"conf"`
	Alarm    []bool     `json:"alarm"`
	Tracking []bool     `json:"tracking"`
}

// snapshot builds the State under the lock.
func (s *Server) snapshot() State {
	s.mu.Lock()
	defer s.mu.Unlock()
	now := s.now()
	st := State{
		Now:         float64(now.UnixNano()) / 1e9,
		Frame:       s.cur.Info.Index,
		Tick:        s.cur.Tick,
		State:       s.cur.Est.State.String(),
		Tracking:    s.cur.Est.Tracking,
		Alarm:       s.cur.Est.Alarm,
		Reason:      s.cur.Est.Reason,
		Confidence:  s.cur.Est.Confidence,
		Frames:      s.frames,
		Ticks:       s.ticks,
		Drops:       s.drops,
		SourceDrops: s.sourceDrops,
		Skipped:     s.skipped,
		Alarms:      s.alarms,
		Health:      []Health{},
		StreamFrame: -1,
		History:     History{SpanS: s.opts.History.Seconds(), T: []float64{}, Offset: []*float64{}, Conf: []float64{}, Alarm: []bool{}, Tracking: []bool{}},
	}
	if s.haveLast {
		st.AgeS = now.Sub(s.lastAt).Seconds()
	}
	st.Stale = !s.haveLast || now.Sub(s.lastAt) > s.opts.StaleAfter
	if !s.haveLast {
		st.Reason = "no result from the pipeline yet"
	}
	if s.cur.Est.Tracking {
		st.OffsetPx = finitePtr(s.cur.Est.OffsetPx)
		st.HeadingDeg = finitePtr(s.cur.Est.HeadingDeg)
		if s.curFloor != nil {
			st.OffsetMM = finitePtr(s.curFloor.OffsetMM)
		}
	}
	if s.jpeg != nil {
		st.StreamFrame = s.jpegIndex
	}
	for _, n := range s.healthNames() {
		h := s.health[n]
		st.Health = append(st.Health, Health{Name: n, OK: h.ok, Detail: h.detail, AgeS: now.Sub(h.updated).Seconds()})
	}
	from := now.Add(-s.opts.History)
	s.hist.each(func(p sample) {
		if p.at.Before(from) {
			return
		}
		h := &st.History
		h.T = append(h.T, p.at.Sub(now).Seconds())
		if p.tracking {
			h.Offset = append(h.Offset, finitePtr(p.offsetPx))
		} else {
			h.Offset = append(h.Offset, nil)
		}
		h.Conf = append(h.Conf, p.confidence)
		h.Alarm = append(h.Alarm, p.alarm)
		h.Tracking = append(h.Tracking, p.tracking)
	})
	return st
}

func finitePtr(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

func (s *Server) serveState(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	json.NewEncoder(w).Encode(s.snapshot())
}

func (s *Server) serveMetrics(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/plain; version=0.0.4; charset=utf-8")
	s.WriteMetrics(w)
}

// WriteMetrics writes the metrics in the Prometheus text format.
func (s *Server) WriteMetrics(w io.Writer) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	now := s.now()
	p := &promWriter{w: w}
	b2f := func(b bool) float64 {
		if b {
			return 1
		}
		return 0
	}
	p.family("hewline_frames_total", "counter", "Frames processed by the pipeline.")
	p.sample("hewline_frames_total", float64(s.frames))
	p.family("hewline_ticks_total", "counter", "Watchdog results without a frame (the source was silent).")
	p.sample("hewline_ticks_total", float64(s.ticks))
	p.family("hewline_drops_total", "counter", "Frames the live pipeline dropped as stale (Result.Drops, or as set by the run loop).")
	p.sample("hewline_drops_total", float64(s.drops))
	p.family("hewline_source_drops_total", "counter", "Frames the source dropped as stale before the pipeline (the camera reader keeps only the freshest).")
	p.sample("hewline_source_drops_total", float64(s.sourceDrops))
	p.family("hewline_frames_skipped_total", "counter", "Frame indices missing between processed frames (drops and capture losses).")
	p.sample("hewline_frames_skipped_total", float64(s.skipped))
	p.family("hewline_alarms_total", "counter", "Times the fail-safe alarm came on.")
	p.sample("hewline_alarms_total", float64(s.alarms))
	p.family("hewline_alarm", "gauge", "1 while the fail-safe alarm is on.")
	p.sample("hewline_alarm", b2f(s.cur.Est.Alarm))
	p.family("hewline_tracking", "gauge", "1 while the estimate may be used for guidance.")
	p.sample("hewline_tracking", b2f(s.cur.Est.Tracking))
	p.family("hewline_confidence", "gauge", "Tracking confidence of the latest estimate, 0 to 1.")
	p.sample("hewline_confidence", s.cur.Est.Confidence)
	p.family("hewline_state", "gauge", "1 for the current tracking state, 0 for the others.")
	for st := guidance.State(0); int(st) < numStates; st++ {
		p.sample("hewline_state", b2f(s.cur.Est.State == st), "state", st.String())
	}
	p.family("hewline_state_seconds_total", "counter", "Time spent in each tracking state.")
	for st := guidance.State(0); int(st) < numStates; st++ {
		d := s.stateTime[st]
		if s.haveLast && s.cur.Est.State == st && now.After(s.lastAt) {
			d += now.Sub(s.lastAt) // the state in force until now
		}
		p.sample("hewline_state_seconds_total", d.Seconds(), "state", st.String())
	}
	age := math.Inf(1)
	if s.haveLast {
		age = now.Sub(s.lastAt).Seconds()
	}
	p.family("hewline_last_result_age_seconds", "gauge", "Time since the last pipeline result (+Inf before the first).")
	p.sample("hewline_last_result_age_seconds", age)
	p.histogram("hewline_decision_latency_seconds", "Time from reading a frame to its estimate (Decided - Captured).", &s.latency)
	if len(s.health) > 0 {
		p.family("hewline_health", "gauge", "1 when a part of the run (camera, outputs) reports healthy.")
		for _, n := range s.healthNames() {
			p.sample("hewline_health", b2f(s.health[n].ok), "part", n)
		}
	}
	p.family("hewline_status_stream_clients", "gauge", "Clients watching /stream.mjpg.")
	p.sample("hewline_status_stream_clients", float64(s.streamClients))
	p.family("hewline_status_encode_errors_total", "counter", "Frames the status page could not encode as JPEG.")
	p.sample("hewline_status_encode_errors_total", float64(s.encodeErrors))
	return p.err
}

// latestJPEG returns the newest JPEG (nil for none), its sequence number
// and a channel closed when a newer one is stored.
func (s *Server) latestJPEG() ([]byte, uint64, int, <-chan struct{}) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.jpeg, s.jpegSeq, s.jpegIndex, s.jpegReady
}

const boundary = "hewlineframe"

// serveStream sends each new JPEG as one part of a multipart/x-mixed-replace
// response. A slow client only delays itself: it always gets the newest
// JPEG when it is ready for one, skipping those it missed.
func (s *Server) serveStream(w http.ResponseWriter, r *http.Request) {
	s.mu.Lock()
	s.streamClients++
	s.mu.Unlock()
	defer func() {
		s.mu.Lock()
		s.streamClients--
		s.mu.Unlock()
	}()
	w.Header().Set("Content-Type", "multipart/x-mixed-replace; boundary="+boundary)
	w.Header().Set("Cache-Control", "no-store")
	rc := http.NewResponseController(w)
	w.WriteHeader(http.StatusOK)
	if rc.Flush() != nil { // send the headers now: the first JPEG may take a while
		return
	}
	var sent uint64
	for {
		b, seq, idx, ready := s.latestJPEG()
		if b != nil && seq != sent {
			rc.SetWriteDeadline(time.Now().Add(10 * time.Second))
			_, err := fmt.Fprintf(w, "--%s\r\nContent-Type: image/jpeg\r\nContent-Length: %d\r\nX-Frame-Index: %d\r\n\r\n", boundary, len(b), idx)
			if err == nil {
				_, err = w.Write(b)
			}
			if err == nil {
				_, err = w.Write([]byte("\r\n"))
			}
			if err == nil {
				err = rc.Flush()
			}
			if err != nil {
				return
			}
			sent = seq
			continue
		}
		select {
		case <-ready:
		case <-r.Context().Done():
			return
		case <-s.done:
			return
		}
	}
}

// serveFrame sends the latest JPEG, or 503 when there is none yet (the
// stream encodes only while someone watches it; see Frame).
func (s *Server) serveFrame(w http.ResponseWriter, r *http.Request) {
	b, _, idx, _ := s.latestJPEG()
	if b == nil {
		http.Error(w, "status: no frame encoded yet (frames are encoded while /stream.mjpg is watched)", http.StatusServiceUnavailable)
		return
	}
	w.Header().Set("Content-Type", "image/jpeg")
	w.Header().Set("Cache-Control", "no-store")
	w.Header().Set("X-Frame-Index", strconv.Itoa(idx))
	w.Write(b)
}
