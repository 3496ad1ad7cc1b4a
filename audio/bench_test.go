package audio

import (
	"context"
	"math/rand"
	"sort"
	"sync"
	"testing"
	"time"

	"github.com/rs/zerolog"
)

// BenchmarkFill20ms is the synthesis cost of one 20 ms stereo buffer at
// 48 kHz.
func BenchmarkFill20ms(b *testing.B) {
	for name, c := range map[string]Cue{
		"tone":  {Guide: true, Offset: 0.4},
		"alarm": {Alarm: true},
	} {
		b.Run(name, func(b *testing.B) {
			s := newTestSynth(b, DefaultMapping(), DefaultAlarm())
			s.Set(c)
			buf := make([]float32, 2*960)
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				s.Fill(buf)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/20e6*100, "%CPU-of-realtime")
		})
	}
}

// BenchmarkSetToSample counts, in samples, how long after Set the output
// of a Synth first differs from a twin that did not get the new cue.
func BenchmarkSetToSample(b *testing.B) {
	worst := 0
	for i := 0; i < b.N; i++ {
		a := newTestSynth(b, DefaultMapping(), DefaultAlarm())
		z := newTestSynth(b, DefaultMapping(), DefaultAlarm())
		old := Cue{Guide: true, Offset: 0.3}
		a.Set(old)
		z.Set(old)
		pre := make([]float32, 2*(1+i%977)) // a different phase each time
		a.Fill(pre)
		z.Fill(pre)
		a.Set(Cue{Guide: true, Offset: -0.6})
		ba, bz := make([]float32, 2*960), make([]float32, 2*960)
		a.Fill(ba)
		z.Fill(bz)
		first := len(ba) / 2
		for k := range ba {
			if ba[k] != bz[k] {
				first = k / 2
				break
			}
		}
		worst = max(worst, first)
	}
	b.ReportMetric(float64(worst), "worst-samples")
	b.ReportMetric(float64(worst)/testRate*1000, "worst-ms")
}

// latencySink timestamps the first Write that carries sound after the
// benchmark armed it.
type latencySink struct {
	mu    sync.Mutex
	armed time.Time
	got   chan time.Duration
	quiet chan struct{}
	wantQ bool
}

func (s *latencySink) Write(b []float32) error {
	loud := false
	for _, v := range b {
		if v != 0 {
			loud = true
			break
		}
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if !s.armed.IsZero() && loud {
		s.got <- time.Since(s.armed)
		s.armed = time.Time{}
	}
	if s.wantQ && !loud {
		s.wantQ = false
		s.quiet <- struct{}{}
	}
	return nil
}
func (s *latencySink) Halt() error  { return nil }
func (s *latencySink) Close() error { return nil }

// BenchmarkCueToSinkRealTime measures, in wall time, how long after
// Player.Set (at a random moment) the first changed samples reach a sink
// in real-time mode. The bound is one render buffer (20 ms) plus
// scheduling delay.
func BenchmarkCueToSinkRealTime(b *testing.B) {
	sink := &latencySink{got: make(chan time.Duration, 1), quiet: make(chan struct{}, 1)}
	nop := zerolog.Nop()
	p, err := NewPlayer(newTestSynth(b, DefaultMapping(), DefaultAlarm()), PlayerConfig{Log: &nop},
		Channel{Name: "probe", Sink: sink, Alarm: true})
	if err != nil {
		b.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error)
	go func() { done <- p.Run(ctx) }()
	rng := rand.New(rand.NewSource(1))
	var lat []time.Duration
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		time.Sleep(time.Duration(rng.Int63n(int64(20 * time.Millisecond))))
		sink.mu.Lock()
		sink.armed = time.Now()
		sink.mu.Unlock()
		p.Set(Cue{Guide: true, Offset: 1})
		lat = append(lat, <-sink.got)
		sink.mu.Lock()
		sink.wantQ = true
		sink.mu.Unlock()
		p.Set(Cue{})
		<-sink.quiet
	}
	b.StopTimer()
	cancel()
	if err := <-done; err != nil {
		b.Fatal(err)
	}
	sort.Slice(lat, func(i, j int) bool { return lat[i] < lat[j] })
	b.ReportMetric(float64(lat[len(lat)/2].Microseconds())/1000, "median-ms")
	b.ReportMetric(float64(lat[len(lat)*95/100].Microseconds())/1000, "p95-ms")
	b.ReportMetric(float64(lat[len(lat)-1].Microseconds())/1000, "max-ms")
}
