package ctlstream_test

import (
	"bufio"
	"testing"

	"github.com/hewline/hewline/guidance/ctlstream"
	"github.com/hewline/hewline/guidance/internal/ptytest"
)

// TestSerialOverPTY sends over a real tty (a pseudo-terminal standing in
// for a USB serial adapter) and reads the NDJSON lines at the other end.
func TestSerialOverPTY(t *testing.T) {
	master, path := ptytest.Open(t)
	c := newClock()
	s, err := ctlstream.NewSerial(path, 115200, ctlstream.Options{Now: c.Now, Session: 5})
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Send(tracked(0, -3.5, 0.9)); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(master)
	var got []ctlstream.Message
	var r ctlstream.Receiver
	for len(got) < 2 && sc.Scan() {
		m, err := r.Accept(sc.Bytes(), c.Now())
		if err != nil {
			t.Fatalf("line %q: %v", sc.Text(), err)
		}
		got = append(got, m)
	}
	if len(got) != 2 || got[0].OffsetPx != -3.5 || !got[0].Tracking || got[1].Type != ctlstream.TypeHalt {
		t.Fatalf("read %+v, want the frame and the halt", got)
	}
}
