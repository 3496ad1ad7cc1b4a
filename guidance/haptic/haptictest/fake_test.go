package haptictest_test

import (
	"errors"
	"testing"
	"time"

	"github.com/hewline/hewline/guidance/haptic"
	"github.com/hewline/hewline/guidance/haptic/haptictest"
)

func TestFake(t *testing.T) {
	now := time.Unix(10, 0)
	f := &haptictest.Fake{Now: func() time.Time { return now }}
	var _ haptic.Driver = f
	if err := f.Set(3, 4); err != nil {
		t.Fatal(err)
	}
	now = now.Add(time.Second)
	f.Err = errors.New("unplugged")
	if err := f.Set(5, 6); err == nil {
		t.Error("Err not returned")
	}
	f.Err = nil
	if err := f.Halt(); err != nil {
		t.Fatal(err)
	}
	if err := f.Set(7, 8); !errors.Is(err, haptic.ErrHalted) {
		t.Errorf("Set after Halt = %v", err)
	}
	recs := f.Records()
	if len(recs) != 2 || recs[0].Left != 3 || recs[0].Right != 4 || !recs[0].At.Equal(time.Unix(10, 0)) ||
		!recs[1].Halt || !recs[1].At.Equal(time.Unix(11, 0)) {
		t.Errorf("records %+v", recs)
	}
	if l, r := f.Levels(); l != 0 || r != 0 || !f.Halted() {
		t.Errorf("after halt levels %d %d halted %v", l, r, f.Halted())
	}
}
