package audio

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"sync"
	"time"

	"github.com/rs/zerolog"
)

// Sink takes rendered audio. Write gets interleaved stereo float32 samples
// and must not retain the slice. Halt makes the sink quiet and inert at
// once (later Writes are discarded) and may be called from another
// goroutine while a Write is running; Close releases it.
type Sink interface {
	Write(samples []float32) error
	Halt() error
	Close() error
}

// ErrNoAlarmChannel means the operator asked for an alarm channel and none
// is working: the fail-safe alarm can no longer be heard.
var ErrNoAlarmChannel = errors.New("audio: no alarm channel left")

// NoAlarmChannelError says which channel was the last to fail and why. It
// matches ErrNoAlarmChannel with errors.Is; its exit code is 3.
type NoAlarmChannelError struct {
	Channel string // "" when none was configured
	Cause   error
}

func (e *NoAlarmChannelError) Error() string {
	if e.Channel == "" {
		return ErrNoAlarmChannel.Error() + ": none configured"
	}
	return fmt.Sprintf("%v: %s failed: %v", ErrNoAlarmChannel, e.Channel, e.Cause)
}

// Unwrap returns ErrNoAlarmChannel and the cause.
func (e *NoAlarmChannelError) Unwrap() []error { return []error{ErrNoAlarmChannel, e.Cause} }

// ExitCode is the command's exit status for this error.
func (e *NoAlarmChannelError) ExitCode() int { return 3 }

// Channel is one sink of a Player.
type Channel struct {
	Name string // for logs, e.g. "speaker" or the WAV path
	Sink Sink
	// Alarm marks a channel a person hears the alarm on (the speaker);
	// an audit recording is not one.
	Alarm bool
}

// Clock paces the real-time loop when no sink does. Tests pass a fake.
type Clock interface {
	Now() time.Time
	Sleep(d time.Duration)
}

type wallClock struct{}

func (wallClock) Now() time.Time        { return time.Now() }
func (wallClock) Sleep(d time.Duration) { time.Sleep(d) }

// PlayerConfig configures a Player.
type PlayerConfig struct {
	// Buffer is the render block (default and maximum 20 ms): the longest
	// a cue change waits for its first sample in real-time mode.
	Buffer time.Duration
	// RequireAlarm makes the loss of the last alarm channel an error
	// (ErrNoAlarmChannel) instead of only a log line.
	RequireAlarm bool
	// Log gets the failure reports; nil logs JSON to stderr.
	Log *zerolog.Logger
	// Clock paces Run when no sink does; nil is the wall clock.
	Clock Clock
}

// MaxBuffer is the longest render block a Player accepts.
const MaxBuffer = 20 * time.Millisecond

// Player owns a Synth and its sinks. It renders either in real time (Run)
// or following frame timestamps (Advance, Update). Only one goroutine may
// render; Set and Halt may be called from any goroutine.
type Player struct {
	synth   *Synth
	frames  int // stereo frames per buffer
	buf     []float32
	log     zerolog.Logger
	require bool
	clock   Clock

	mu     sync.Mutex // guards the fields below
	chans  []Channel
	err    error
	halted bool

	rendered int64 // stereo frames rendered so far (owned by the renderer)
}

// NewPlayer returns a Player rendering s into the channels. With
// cfg.RequireAlarm and no alarm channel it fails with a
// *NoAlarmChannelError.
func NewPlayer(s *Synth, cfg PlayerConfig, chans ...Channel) (*Player, error) {
	if s == nil {
		return nil, badf("player without a synth")
	}
	if cfg.Buffer == 0 {
		cfg.Buffer = MaxBuffer
	}
	if cfg.Buffer < time.Millisecond || cfg.Buffer > MaxBuffer {
		return nil, badf("buffer %v: want 1ms..%v", cfg.Buffer, MaxBuffer)
	}
	p := &Player{synth: s, require: cfg.RequireAlarm, clock: cfg.Clock}
	p.frames = int(math.Round(cfg.Buffer.Seconds() * float64(s.Rate())))
	p.buf = make([]float32, 2*p.frames)
	if cfg.Log != nil {
		p.log = *cfg.Log
	} else {
		p.log = zerolog.New(os.Stderr).With().Timestamp().Logger()
	}
	if p.clock == nil {
		p.clock = wallClock{}
	}
	alarm := false
	for _, c := range chans {
		if c.Sink == nil {
			return nil, badf("channel %q has no sink", c.Name)
		}
		alarm = alarm || c.Alarm
	}
	if cfg.RequireAlarm && !alarm {
		return nil, &NoAlarmChannelError{}
	}
	p.chans = append(p.chans, chans...)
	return p, nil
}

// BufferFrames returns the render block in stereo frames.
func (p *Player) BufferFrames() int { return p.frames }

// Rendered returns how much audio has been rendered, in replay or real
// time.
func (p *Player) Rendered() time.Duration {
	return time.Duration(p.rendered) * time.Second / time.Duration(p.synth.Rate())
}

// Set hands the synth a cue. If it raises the alarm while no alarm channel
// works, that is logged as an error every time.
func (p *Player) Set(c Cue) {
	prev := p.synth.Cue()
	p.synth.Set(c)
	if c.Alarm && !prev.Alarm && len(p.Channels(true)) == 0 {
		p.log.Error().Str("event", "alarm_unheard").
			Msg("audio: FAIL-SAFE ALARM RAISED BUT NO ALARM CHANNEL WORKS")
	}
}

// Channels returns the names of the working channels (only alarm channels
// when alarmOnly).
func (p *Player) Channels(alarmOnly bool) []string {
	p.mu.Lock()
	defer p.mu.Unlock()
	var names []string
	for _, c := range p.chans {
		if c.Alarm || !alarmOnly {
			names = append(names, c.Name)
		}
	}
	return names
}

// Err returns the sticky error (a *NoAlarmChannelError), if any.
func (p *Player) Err() error {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.err
}

// Advance renders exactly the samples up to replay time to (rounded to
// the nearest sample) and writes them to the sinks. A time at or before
// what was already rendered renders nothing. Use it in replay: call
// Advance(frame.T) and then Set(cue), or Update.
func (p *Player) Advance(to time.Duration) error {
	target := int64(math.Round(to.Seconds() * float64(p.synth.Rate())))
	for p.rendered < target {
		n := target - p.rendered
		if n > int64(p.frames) {
			n = int64(p.frames)
		}
		if err := p.render(int(n)); err != nil {
			return err
		}
	}
	return p.Err()
}

// Update is Advance(t) followed by Set(c): the cue decided for the frame
// at time t sounds from sample t·rate on.
func (p *Player) Update(t time.Duration, c Cue) error {
	err := p.Advance(t)
	p.Set(c)
	return err
}

// Real-time pacing. A speaker's Write blocks at the card's rate, which
// paces Run by itself; the Clock only keeps Run from racing ahead when no
// sink blocks (a WAV file, ALSA's null device). The card may run a little
// faster than the system clock, so the allowed lead grows by clockSlack
// per second; when a blocking sink holds Run back, the clock is re-read so
// Run never bursts to catch up.
const (
	leadBuffers = 4      // allowed lead over the clock, in buffers: what a card's queues hold
	clockSlack  = 200e-6 // 200 ppm, more than a sound card's clock error (common practice: ±50 ppm crystals)
)

// Run renders in real time until ctx ends, the player is halted or the
// last alarm channel fails with RequireAlarm (then it returns that
// error). See leadBuffers and clockSlack for the pacing.
func (p *Player) Run(ctx context.Context) error {
	rate := float64(p.synth.Rate())
	dur := func(frames int64) time.Duration { return time.Duration(float64(frames) / rate * float64(time.Second)) }
	bufDur := dur(int64(p.frames))
	anchor, anchorFrames := p.clock.Now(), p.rendered
	for ctx.Err() == nil {
		p.mu.Lock()
		halted := p.halted
		p.mu.Unlock()
		if halted {
			return nil
		}
		if err := p.render(p.frames); err != nil {
			return err
		}
		now := p.clock.Now()
		elapsed := now.Sub(anchor)
		lead := dur(p.rendered-anchorFrames) - elapsed
		if lead < -bufDur {
			anchor, anchorFrames = now, p.rendered
			continue
		}
		allowed := leadBuffers*bufDur + time.Duration(float64(elapsed)*clockSlack)
		if lead > allowed {
			p.clock.Sleep(lead - allowed)
		}
	}
	return nil
}

// render makes n frames and writes them to every working channel,
// dropping the ones that fail.
func (p *Player) render(n int) error {
	b := p.buf[:2*n]
	p.synth.Fill(b)
	p.rendered += int64(n)
	p.mu.Lock()
	chans, halted := append([]Channel(nil), p.chans...), p.halted
	p.mu.Unlock()
	if halted {
		return p.Err()
	}
	for _, c := range chans {
		if err := c.Sink.Write(b); err != nil {
			p.drop(c, err)
		}
	}
	return p.Err()
}

func (p *Player) drop(c Channel, cause error) {
	p.mu.Lock()
	for i := range p.chans {
		if p.chans[i].Sink == c.Sink {
			p.chans = append(p.chans[:i], p.chans[i+1:]...)
			break
		}
	}
	alarmLeft := 0
	var left []string
	for _, o := range p.chans {
		left = append(left, o.Name)
		if o.Alarm {
			alarmLeft++
		}
	}
	fatal := c.Alarm && alarmLeft == 0 && p.require && p.err == nil
	if fatal {
		p.err = &NoAlarmChannelError{Channel: c.Name, Cause: cause}
	}
	p.mu.Unlock()

	ev := p.log.Error().Str("event", "audio_channel_lost").Str("channel", c.Name).
		Bool("alarm_channel", c.Alarm).Strs("remaining", left).Int("alarm_channels_left", alarmLeft).Err(cause)
	switch {
	case c.Alarm && alarmLeft == 0:
		ev.Msg("audio: ALARM CHANNEL LOST, NO ALARM CHANNEL LEFT: THE FAIL-SAFE ALARM CANNOT BE HEARD")
	case c.Alarm:
		ev.Msg("audio: ALARM CHANNEL LOST, continuing on the remaining channels")
	default:
		ev.Msg("audio: channel lost, continuing on the remaining channels")
	}
	// The failed sink is silenced and released; its errors add nothing.
	_ = c.Sink.Halt()
	_ = c.Sink.Close()
}

// Halt makes every sink quiet and inert at once; later renders write
// nothing and Run returns.
func (p *Player) Halt() error {
	p.mu.Lock()
	p.halted = true
	chans := append([]Channel(nil), p.chans...)
	p.mu.Unlock()
	var errs []error
	for _, c := range chans {
		if err := c.Sink.Halt(); err != nil {
			errs = append(errs, fmt.Errorf("audio: halt %s: %w", c.Name, err))
		}
	}
	return errors.Join(errs...)
}

// Close halts and closes every sink. Call it after Run or Advance have
// returned.
func (p *Player) Close() error {
	err := p.Halt()
	p.mu.Lock()
	chans := p.chans
	p.chans = nil
	p.mu.Unlock()
	errs := []error{err}
	for _, c := range chans {
		if err := c.Sink.Close(); err != nil {
			errs = append(errs, fmt.Errorf("audio: close %s: %w", c.Name, err))
		}
	}
	return errors.Join(errs...)
}
