package ctlstream

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"time"
)

// Version is the wire-format version written in every message's "v" field.
// A receiver must reject messages of any other version.
const Version = 1

// Message types.
const (
	// TypeGuidance carries one frame's estimate.
	TypeGuidance = "guidance"
	// TypeHeartbeat says the sender is alive but no frame was sent for a
	// while. It never carries an offset or heading.
	TypeHeartbeat = "heartbeat"
	// TypeHalt is the sender's last message: alarm on, tracking off.
	TypeHalt = "halt"
)

// Sentinel errors returned (wrapped) by Decode and the Receiver.
var (
	// ErrMalformed: the bytes are not a message of this format.
	ErrMalformed = errors.New("ctlstream: malformed message")
	// ErrVersion: the message has a "v" other than Version.
	ErrVersion = errors.New("ctlstream: unsupported message version")
	// ErrInvalid: a message to send holds a value that cannot be sent
	// (a non-finite offset, a confidence outside [0, 1], ...).
	ErrInvalid = errors.New("ctlstream: invalid message")
)

// Message is one controller-stream message. See the package documentation
// for the wire format, units and signs.
//
// When Tracking is false the measurement fields (OffsetPx, OffsetMM,
// HeadingDeg, HeadingFloorDeg, CurvaturePerM) are not sent (they go out as
// JSON null) and decode as zero / nil. A receiver must never act on them.
type Message struct {
	// Type is TypeGuidance, TypeHeartbeat or TypeHalt.
	Type string
	// Session identifies one run of the sender; it changes when the
	// sender restarts, and Seq starts again at 1.
	Session uint64
	// Seq counts every message of the session from 1, heartbeats included.
	Seq uint64
	// Frame is the index of the frame the estimate comes from (for a
	// heartbeat: the last frame sent, -1 before any).
	Frame int
	// CaptureT is the frame's time from the start of its source.
	CaptureT time.Duration
	// Sent is the sender's wall-clock time when the message was encoded.
	Sent time.Time
	// CapturedAt is the wall-clock time the frame was read from the
	// camera (zero when unknown). It is not sent; the Sender turns it into
	// LatencyMS.
	CapturedAt time.Time
	// LatencyMS is the time from capture to sending in milliseconds; nil
	// when unknown. Filled in by the Sender.
	LatencyMS *float64
	// Tracking is true only when the offsets below are trusted and may be
	// used to steer.
	Tracking bool
	// Alarm is true when the fail-safe alarm is raised. A message with
	// Alarm true never has Tracking true.
	Alarm bool
	// State is the tracker's state name, for logs and displays.
	State string
	// OffsetPx: lateral offset of the line at the reference row in image
	// pixels, positive when the line lies right of centre (steer right).
	OffsetPx float64
	// OffsetMM: the same on the floor in millimetres; nil until calibrated.
	OffsetMM *float64
	// HeadingDeg: line angle from the image vertical, positive when the far
	// end leans right.
	HeadingDeg float64
	// HeadingFloorDeg: the same on the floor; nil until calibrated.
	HeadingFloorDeg *float64
	// Confidence in [0, 1].
	Confidence float64
	// CurvaturePerM: pure-pursuit steering hint in 1/m, positive = turn
	// right; nil when not computed (needs a floor calibration).
	CurvaturePerM *float64
	// StaleAfter: the sender's promise that a receiver may treat guidance
	// older than this as lost (the receiver may use a shorter limit).
	StaleAfter time.Duration
	// Reason says why tracking is off or the alarm is raised.
	Reason string
}

// Validate reports whether m can be sent as is.
func (m *Message) Validate() error {
	switch m.Type {
	case TypeGuidance, TypeHeartbeat, TypeHalt:
	default:
		return fmt.Errorf("%w: type %q", ErrInvalid, m.Type)
	}
	if !finite(m.Confidence) || m.Confidence < 0 || m.Confidence > 1 {
		return fmt.Errorf("%w: confidence %v outside [0, 1]", ErrInvalid, m.Confidence)
	}
	if m.Tracking && m.Alarm {
		return fmt.Errorf("%w: tracking and alarm both set", ErrInvalid)
	}
	if m.Tracking && m.Type != TypeGuidance {
		return fmt.Errorf("%w: %s message with tracking set", ErrInvalid, m.Type)
	}
	if !m.Tracking {
		return nil
	}
	if !finite(m.OffsetPx) || !finite(m.HeadingDeg) {
		return fmt.Errorf("%w: non-finite offset %v or heading %v", ErrInvalid, m.OffsetPx, m.HeadingDeg)
	}
	opt := [...]struct {
		name string
		p    *float64
	}{{"offset_mm", m.OffsetMM}, {"heading_floor_deg", m.HeadingFloorDeg}, {"curvature_per_m", m.CurvaturePerM}}
	for _, o := range opt {
		if o.p != nil && !finite(*o.p) {
			return fmt.Errorf("%w: non-finite %s", ErrInvalid, o.name)
		}
	}
	return nil
}

func finite(f float64) bool { return !math.IsNaN(f) && !math.IsInf(f, 0) }

// AppendJSON appends m's wire form (one JSON object and a newline) to dst
// and returns the extended slice. It validates m first.
func (m *Message) AppendJSON(dst []byte) ([]byte, error) {
	if err := m.Validate(); err != nil {
		return dst, err
	}
	b := append(dst, `{"v":`...)
	b = strconv.AppendInt(b, Version, 10)
	b = append(b, `,"type":`...)
	b = appendString(b, m.Type)
	b = append(b, `,"session":`...)
	b = strconv.AppendUint(b, m.Session, 10)
	b = append(b, `,"seq":`...)
	b = strconv.AppendUint(b, m.Seq, 10)
	b = append(b, `,"frame":`...)
	b = strconv.AppendInt(b, int64(m.Frame), 10)
	b = append(b, `,"t_capture_s":`...)
	b = strconv.AppendFloat(b, m.CaptureT.Seconds(), 'f', 6, 64)
	b = append(b, `,"sent_unix_ns":`...)
	b = strconv.AppendInt(b, m.Sent.UnixNano(), 10)
	b = append(b, `,"latency_ms":`...)
	if m.LatencyMS != nil && finite(*m.LatencyMS) {
		b = strconv.AppendFloat(b, *m.LatencyMS, 'f', 1, 64)
	} else {
		b = append(b, "null"...)
	}
	b = append(b, `,"tracking":`...)
	b = strconv.AppendBool(b, m.Tracking)
	b = append(b, `,"alarm":`...)
	b = strconv.AppendBool(b, m.Alarm)
	b = append(b, `,"state":`...)
	b = appendString(b, m.State)
	b = append(b, `,"offset_px":`...)
	b = appendMeasure(b, m.Tracking, &m.OffsetPx)
	b = append(b, `,"offset_mm":`...)
	b = appendMeasure(b, m.Tracking, m.OffsetMM)
	b = append(b, `,"heading_deg":`...)
	b = appendMeasure(b, m.Tracking, &m.HeadingDeg)
	b = append(b, `,"heading_floor_deg":`...)
	b = appendMeasure(b, m.Tracking, m.HeadingFloorDeg)
	b = append(b, `,"confidence":`...)
	b = strconv.AppendFloat(b, m.Confidence, 'f', 4, 64)
	b = append(b, `,"curvature_per_m":`...)
	b = appendMeasureN(b, m.Tracking, m.CurvaturePerM, 6)
	b = append(b, `,"stale_after_ms":`...)
	b = strconv.AppendInt(b, m.StaleAfter.Milliseconds(), 10)
	b = append(b, `,"reason":`...)
	b = appendString(b, m.Reason)
	b = append(b, "}\n"...)
	return b, nil
}

// appendMeasure writes a measurement, or null when not tracking or absent.
func appendMeasure(b []byte, tracking bool, p *float64) []byte {
	return appendMeasureN(b, tracking, p, 4)
}

// appendMeasureN is appendMeasure with digits decimals.
func appendMeasureN(b []byte, tracking bool, p *float64, digits int) []byte {
	if !tracking || p == nil {
		return append(b, "null"...)
	}
	return strconv.AppendFloat(b, *p, 'f', digits, 64)
}

// appendString writes s as a JSON string. Plain ASCII is copied directly;
// anything else goes through encoding/json.
func appendString(b []byte, s string) []byte {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c < 0x20 || c >= 0x7f || c == '"' || c == '\\' || c == '<' || c == '>' || c == '&' {
			q, _ := json.Marshal(s) // a string always marshals
			return append(b, q...)
		}
	}
	b = append(b, '"')
	b = append(b, s...)
	return append(b, '"')
}

// wire is the decoded JSON form; pointers tell absent/null from zero.
type wire struct {
	V               *int     `json:"v"`
	Type            string   `json:"type"`
	Session         uint64   `json:"session"`
	Seq             *uint64  `json:"seq"`
	Frame           int      `json:"frame"`
	CaptureS        float64  `json:"t_capture_s"`
	SentUnixNano    int64    `json:"sent_unix_ns"`
	LatencyMS       *float64 `json:"latency_ms"`
	Tracking        *bool    `json:"tracking"`
	Alarm           *bool    `json:"alarm"`
	State           string   `json:"state"`
	OffsetPx        *float64 `json:"offset_px"`
	OffsetMM        *float64 `json:"offset_mm"`
	HeadingDeg      *float64 `json:"heading_deg"`
	HeadingFloorDeg *float64 `json:"heading_floor_deg"`
	Confidence      float64  `json:"confidence"`
	CurvaturePerM   *float64 `json:"curvature_per_m"`
	StaleAfterMS    int64    `json:"stale_after_ms"`
	Reason          string   `json:"reason"`
}

// Decode parses one message (trailing newline allowed). A message whose
// tracking flag is true but lacks offset_px or heading_deg, or has both
// tracking and alarm set, is malformed. When tracking is false the
// measurement fields of the result are zero / nil whatever the bytes held.
func Decode(data []byte) (Message, error) {
	var w wire
	if err := json.Unmarshal(data, &w); err != nil {
		return Message{}, fmt.Errorf("%w: %v", ErrMalformed, err)
	}
	if w.V == nil {
		return Message{}, fmt.Errorf("%w: no \"v\" field", ErrMalformed)
	}
	if *w.V != Version {
		return Message{}, fmt.Errorf("%w: v=%d, want %d", ErrVersion, *w.V, Version)
	}
	switch w.Type {
	case TypeGuidance, TypeHeartbeat, TypeHalt:
	default:
		return Message{}, fmt.Errorf("%w: type %q", ErrMalformed, w.Type)
	}
	if w.Seq == nil || w.Tracking == nil || w.Alarm == nil {
		return Message{}, fmt.Errorf("%w: seq, tracking or alarm missing", ErrMalformed)
	}
	m := Message{
		Type:       w.Type,
		Session:    w.Session,
		Seq:        *w.Seq,
		Frame:      w.Frame,
		CaptureT:   time.Duration(math.Round(w.CaptureS * 1e9)),
		Sent:       time.Unix(0, w.SentUnixNano),
		LatencyMS:  w.LatencyMS,
		Tracking:   *w.Tracking,
		Alarm:      *w.Alarm,
		State:      w.State,
		Confidence: w.Confidence,
		StaleAfter: time.Duration(w.StaleAfterMS) * time.Millisecond,
		Reason:     w.Reason,
	}
	if m.Tracking && (m.Alarm || m.Type != TypeGuidance) {
		return Message{}, fmt.Errorf("%w: tracking set on an alarm or %s message", ErrMalformed, m.Type)
	}
	if m.Tracking {
		if w.OffsetPx == nil || w.HeadingDeg == nil {
			return Message{}, fmt.Errorf("%w: tracking without offset_px or heading_deg", ErrMalformed)
		}
		m.OffsetPx, m.HeadingDeg = *w.OffsetPx, *w.HeadingDeg
		m.OffsetMM, m.HeadingFloorDeg, m.CurvaturePerM = w.OffsetMM, w.HeadingFloorDeg, w.CurvaturePerM
	}
	return m, nil
}
