package report

import (
	"math"
	"sort"
	"strings"

	"github.com/hewline/hewline/guidance/tracklog"
)

// Cause is the class of a loss of tracking, read from the record's reason.
type Cause string

// The causes a loss is put into.
const (
	CauseNoCandidate   Cause = "no candidate"   // the detector found no line
	CauseLowConfidence Cause = "low confidence" // a line, but below the threshold
	CauseGated         Cause = "gated"          // rejected by the innovation gate
	CauseCameraStall   Cause = "camera stall"   // no frame arrived in time
	CauseSizeChange    Cause = "size change"    // the frame size changed
	CauseFault         Cause = "fault"          // a reported fault
	CauseOther         Cause = "other"
)

// Classify puts a record's reason text into a Cause. The words matched
// are those the tracker and pipeline write (see guidance.Tracker).
func Classify(reason string) Cause {
	r := strings.ToLower(reason)
	switch {
	case r == "":
		return CauseOther
	case strings.Contains(r, "stall") || strings.Contains(r, "no frame for"):
		return CauseCameraStall
	case strings.Contains(r, "size"):
		return CauseSizeChange
	case strings.Contains(r, "gate"):
		return CauseGated
	case strings.Contains(r, "confidence") && strings.Contains(r, "below"):
		return CauseLowConfidence
	case strings.Contains(r, "no line") || strings.Contains(r, "no candidate") ||
		strings.Contains(r, "not found") || strings.Contains(r, "no stripe"):
		return CauseNoCandidate
	case strings.Contains(r, "fault") || strings.Contains(r, "error") ||
		strings.Contains(r, "backwards") || strings.Contains(r, "camera"):
		return CauseFault
	}
	return CauseOther
}

// Period is a run of frames [StartFrame, EndFrame] (record indices, both
// inclusive) and its time span in seconds.
type Period struct {
	StartFrame, EndFrame int     // frame numbers of the first and last record
	Start, Duration      float64 // seconds from the clip's time base
}

// Loss is one loss of tracking: a maximal run of records with tracking
// false after tracking had been true, or with the alarm on.
type Loss struct {
	Period
	Alarm  bool   // the alarm was on for part of it
	Cause  Cause  // from the first reason in the run that classifies
	Reason string // that reason, as logged
	// Thumb is a JPEG of the first frame of the loss when the recording
	// was found; nil otherwise.
	Thumb []byte
}

// Latency holds percentiles of decision_ms (nearest-rank method).
type Latency struct {
	N                  int
	P50, P95, P99, Max float64
}

// Stats is what the report shows for one log (or the sum of several).
type Stats struct {
	Name, Source   string
	Frames         int
	Duration       float64 // seconds covered by the records
	TrackingFrames int
	AlarmFrames    int
	StateFrames    map[string]int
	StateSeconds   map[string]float64
	Alarms         []Period
	Losses         []Loss
	Latency        *Latency // nil when no record has decision_ms
	Drops          int
	End            string // the summary's end, or "" when it has none
}

// TrackingPct is the share of frames that were tracking, in percent.
func (s *Stats) TrackingPct() float64 {
	if s.Frames == 0 {
		return 0
	}
	return 100 * float64(s.TrackingFrames) / float64(s.Frames)
}

// frameSpan is how long record i lasts: until the next record, or one
// frame period for the last.
func frameSpan(rs []tracklog.Record, i int, fps float64) float64 {
	if i+1 < len(rs) {
		if d := rs[i+1].T - rs[i].T; d > 0 {
			return d
		}
		return 0
	}
	if fps > 0 {
		return 1 / fps
	}
	return 0
}

// span returns the period of records [a, b].
func span(rs []tracklog.Record, a, b int, fps float64) Period {
	end := rs[b].T + frameSpan(rs, b, fps)
	return Period{StartFrame: rs[a].Frame, EndFrame: rs[b].Frame, Start: rs[a].T, Duration: end - rs[a].T}
}

// Compute counts the statistics of one log. It does not retain l.
func Compute(name string, l *tracklog.Log) Stats {
	s := Stats{Name: name, Source: l.Header.Source, StateFrames: map[string]int{}, StateSeconds: map[string]float64{}}
	rs := l.Records
	fps := l.Header.FPS
	s.Frames = len(rs)
	if len(rs) > 0 {
		s.Duration = rs[len(rs)-1].T + frameSpan(rs, len(rs)-1, fps) - rs[0].T
	}
	var lat []float64
	seenTracking := false
	lossStart, alarmStart := -1, -1
	for i, r := range rs {
		if r.Tracking {
			s.TrackingFrames++
		}
		if r.Alarm {
			s.AlarmFrames++
		}
		s.StateFrames[r.State]++
		s.StateSeconds[r.State] += frameSpan(rs, i, fps)
		if r.DecisionMS != nil {
			lat = append(lat, *r.DecisionMS)
		}
		// Alarm periods.
		if r.Alarm && alarmStart < 0 {
			alarmStart = i
		}
		if alarmStart >= 0 && (!r.Alarm || i == len(rs)-1) {
			end := i - 1
			if r.Alarm {
				end = i
			}
			s.Alarms = append(s.Alarms, span(rs, alarmStart, end, fps))
			alarmStart = -1
		}
		// Losses.
		lost := r.Alarm || (!r.Tracking && seenTracking)
		if lost && lossStart < 0 {
			lossStart = i
		}
		if lossStart >= 0 && (!lost || i == len(rs)-1) {
			end := i - 1
			if lost {
				end = i
			}
			s.Losses = append(s.Losses, makeLoss(rs, lossStart, end, fps))
			lossStart = -1
		}
		if r.Tracking {
			seenTracking = true
		}
	}
	if len(lat) > 0 {
		s.Latency = percentiles(lat)
	}
	if l.Summary != nil {
		s.End = l.Summary.End
		s.Drops = int(l.Summary.Extra["drops"])
	}
	return s
}

func makeLoss(rs []tracklog.Record, a, b int, fps float64) Loss {
	l := Loss{Period: span(rs, a, b, fps), Cause: CauseOther}
	for i := a; i <= b; i++ {
		if rs[i].Alarm {
			l.Alarm = true
		}
	}
	for i := a; i <= b; i++ {
		if c := Classify(rs[i].Reason); c != CauseOther {
			l.Cause, l.Reason = c, rs[i].Reason
			return l
		}
	}
	for i := a; i <= b; i++ {
		if rs[i].Reason != "" {
			l.Reason = rs[i].Reason
			break
		}
	}
	return l
}

// percentiles uses the nearest-rank method: the p-th percentile is the
// smallest value with at least p % of the values at or below it (common
// practice). It sorts v.
func percentiles(v []float64) *Latency {
	sort.Float64s(v)
	rank := func(p float64) float64 { return NearestRank(v, p) }
	return &Latency{N: len(v), P50: rank(50), P95: rank(95), P99: rank(99), Max: v[len(v)-1]}
}

// NearestRank is the p-th percentile (0 < p ≤ 100) of sorted by the
// nearest-rank method: the smallest value with at least p % of the values
// at or below it. sorted must be in ascending order and not empty.
func NearestRank(sorted []float64, p float64) float64 {
	k := int(math.Ceil(p / 100 * float64(len(sorted))))
	k = min(max(k, 1), len(sorted))
	return sorted[k-1]
}

// Combine adds up several logs' statistics. Alarm periods and losses are
// kept per log and not merged; latency percentiles are recomputed from
// the logs in ls (pass the same logs in the same order).
func Combine(name string, st []Stats, ls []*tracklog.Log) Stats {
	c := Stats{Name: name, StateFrames: map[string]int{}, StateSeconds: map[string]float64{}}
	for _, s := range st {
		c.Frames += s.Frames
		c.Duration += s.Duration
		c.TrackingFrames += s.TrackingFrames
		c.AlarmFrames += s.AlarmFrames
		c.Drops += s.Drops
		for k, v := range s.StateFrames {
			c.StateFrames[k] += v
		}
		for k, v := range s.StateSeconds {
			c.StateSeconds[k] += v
		}
		c.Alarms = append(c.Alarms, s.Alarms...)
		c.Losses = append(c.Losses, s.Losses...)
	}
	var lat []float64
	for _, l := range ls {
		for _, r := range l.Records {
			if r.DecisionMS != nil {
				lat = append(lat, *r.DecisionMS)
			}
		}
	}
	if len(lat) > 0 {
		c.Latency = percentiles(lat)
	}
	return c
}
