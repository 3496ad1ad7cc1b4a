//go:build linux && cgo

package audio

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/hewline/hewline/audio/audiotest"
	"github.com/rs/zerolog"
)

// The sound library allows one context per process, so each real-device
// case runs in a child process of this test binary, with ALSA pointed at a
// configuration of our own through ALSA_CONFIG_PATH.
const childEnv = "HEWLINE_AUDIO_ALSA_CHILD"

var alsaConfigs = map[string]string{
	// ALSA's null plugin: takes samples and discards them, like a card.
	"null": "pcm.!default { type null }\n",
	// A device that fails mid-run: ALSA's file plugin pipes into a
	// command that reads nothing and quits after 0.15 s; once the pipe is
	// full writes wait, then fail (EPIPE → EIO). The open succeeds long
	// before.
	"lost": "pcm.!default { type file slave.pcm { type null } file \"|sleep 0.15\" format \"raw\" }\n",
	// A card that does not exist.
	"missing": "pcm.!default { type hw card 7 device 0 }\nctl.!default { type hw card 7 }\n",
}

func TestSpeakerALSA(t *testing.T) {
	if mode := os.Getenv(childEnv); mode != "" {
		speakerChild(t, mode)
		return
	}
	for _, mode := range []string{"null", "missing", "lost"} {
		t.Run(mode, func(t *testing.T) {
			conf := filepath.Join(t.TempDir(), "asound.conf")
			if err := os.WriteFile(conf, []byte(alsaConfigs[mode]), 0o644); err != nil {
				t.Fatal(err)
			}
			cmd := exec.Command(os.Args[0], "-test.run=^TestSpeakerALSA$", "-test.v", "-test.count=1")
			cmd.Env = append(os.Environ(), childEnv+"="+mode, "ALSA_CONFIG_PATH="+conf)
			out, err := cmd.CombinedOutput()
			t.Logf("child (%s):\n%s", mode, out)
			if err != nil || !strings.Contains(string(out), "CHILD OK") {
				t.Fatalf("child %s failed: %v", mode, err)
			}
		})
	}
}

func speakerChild(t *testing.T, mode string) {
	s, err := NewSpeaker(testRate, 20*time.Millisecond)
	switch mode {
	case "missing":
		if !errors.Is(err, ErrNoDevice) {
			t.Fatalf("NewSpeaker on a missing card = %v, want ErrNoDevice", err)
		}
		// The context's failure is remembered: asking again fails alike.
		if _, err2 := NewSpeaker(testRate, 20*time.Millisecond); !errors.Is(err2, ErrNoDevice) {
			t.Fatalf("second NewSpeaker = %v, want ErrNoDevice", err2)
		}
		fmt.Println("CHILD OK:", err)
	case "lost":
		if err != nil {
			t.Fatalf("NewSpeaker: %v", err)
		}
		var logs bytes.Buffer
		l := zerolog.New(&logs)
		audit := &audiotest.Recorder{}
		p, err := NewPlayer(newTestSynth(t, DefaultMapping(), DefaultAlarm()),
			PlayerConfig{RequireAlarm: true, Log: &l},
			Channel{Name: "speaker", Sink: s, Alarm: true}, Channel{Name: "audit", Sink: audit})
		if err != nil {
			t.Fatal(err)
		}
		p.Set(Cue{Alarm: true})
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		err = p.Run(ctx)
		var nac *NoAlarmChannelError
		if !errors.As(err, &nac) || !errors.Is(err, ErrDeviceLost) || nac.ExitCode() != 3 {
			t.Fatalf("Run with the device lost = %v, want ErrNoAlarmChannel caused by ErrDeviceLost", err)
		}
		if !strings.Contains(logs.String(), "NO ALARM CHANNEL LEFT") {
			t.Fatalf("log lacks the loss: %s", logs.String())
		}
		if len(audit.Samples()) == 0 {
			t.Fatal("the audit channel got nothing before the loss")
		}
		fmt.Println("CHILD OK:", err)
	case "null":
		if err != nil {
			t.Fatalf("NewSpeaker on the null device: %v", err)
		}
		if _, err := NewSpeaker(testRate, 20*time.Millisecond); err == nil {
			t.Fatal("a second speaker opened while the first is open")
		}
		l := zerolog.New(os.Stderr)
		p, err := NewPlayer(newTestSynth(t, DefaultMapping(), DefaultAlarm()),
			PlayerConfig{RequireAlarm: true, Log: &l}, Channel{Name: "speaker", Sink: s, Alarm: true})
		if err != nil {
			t.Fatal(err)
		}
		p.Set(Cue{Alarm: true})
		ctx, cancel := context.WithTimeout(context.Background(), 400*time.Millisecond)
		defer cancel()
		start := time.Now()
		if err := p.Run(ctx); err != nil {
			t.Fatalf("Run on the null device: %v", err)
		}
		wall := time.Since(start)
		if err := s.Err(); err != nil {
			t.Fatalf("speaker error after playing: %v", err)
		}
		if got := p.Channels(true); len(got) != 1 {
			t.Fatalf("alarm channels %v after playing", got)
		}
		// The null device takes samples without blocking, so the clock
		// paces: about the wall time plus leadBuffers buffers.
		if d := p.Rendered() - wall; d < -50*time.Millisecond || d > 150*time.Millisecond {
			t.Fatalf("%v rendered in %v of wall time", p.Rendered(), wall)
		}
		if err := p.Close(); err != nil {
			t.Fatal(err)
		}
		// Closed, the device slot is free again.
		s2, err := NewSpeaker(testRate, 20*time.Millisecond)
		if err != nil {
			t.Fatalf("reopen after Close: %v", err)
		}
		s2.Close()
		fmt.Printf("CHILD OK: rendered %v in %v of wall time\n", p.Rendered(), wall)
	}
}
