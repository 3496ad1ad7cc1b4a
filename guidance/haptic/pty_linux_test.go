package haptic_test

import (
	"bufio"
	"testing"

	"github.com/hewline/hewline/guidance/haptic"
	"github.com/hewline/hewline/guidance/internal/ptytest"
)

// TestSerialOverPTY drives a real tty (a pseudo-terminal standing in for a
// USB serial motor driver) and reads the protocol lines at the other end.
func TestSerialOverPTY(t *testing.T) {
	master, path := ptytest.Open(t)
	s, err := haptic.OpenSerial(path, 115200)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Set(12, 200); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(master)
	var got []string
	for len(got) < 2 && sc.Scan() {
		got = append(got, sc.Text())
	}
	if len(got) != 2 || got[0] != "L 12 R 200" || got[1] != "H" {
		t.Fatalf("read %q, want the levels and the halt", got)
	}
}
