package record_test

import (
	"testing"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/record"
)

// Every queued frame is recorded in order; frames that found no free
// buffer are counted as drops, so recorded + dropped = written.
func TestBackgroundRecordsOrDropsEveryFrame(t *testing.T) {
	r, err := record.New(record.Options{Dir: t.TempDir(), FreeSpace: plenty})
	if err != nil {
		t.Fatal(err)
	}
	b := record.NewBackground(r, 4)
	const n = 80
	for i := 0; i < n; i++ {
		m := capturetest.PatternMat(size, i)
		if err := b.Write(m, capture.FrameInfo{Index: i, T: frameTime(i)}); err != nil {
			t.Fatal(err)
		}
		m.Close()
	}
	if err := b.Close(); err != nil {
		t.Fatal(err)
	}
	got, nums := countFrames(t, r.Files()[0])
	if got+int(b.Drops()) != n || got != r.Frames() {
		t.Errorf("recorded %d (recorder says %d) + dropped %d != %d", got, r.Frames(), b.Drops(), n)
	}
	_, lines, err := record.ReadSidecarFull(record.SidecarPath(r.Files()[0]))
	if err != nil {
		t.Fatal(err)
	}
	for i := range nums {
		if nums[i] != lines[i].Src || (i > 0 && nums[i] <= nums[i-1]) || time.Duration(lines[i].T*1e9+0.5) != frameTime(lines[i].Src) {
			t.Fatalf("clip frame %d: number %d, sidecar %+v", i, nums[i], lines[i])
		}
	}
	t.Logf("%d recorded, %d dropped", got, b.Drops())
}
