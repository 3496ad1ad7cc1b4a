package record

import (
	"fmt"
	"sync"
	"sync/atomic"

	"github.com/hewline/hewline/capture"
	"gocv.io/x/gocv"
)

// Background runs a Recorder on its own goroutine so that encoding (several
// milliseconds per 640×480 frame) never delays the live loop. Write copies
// the frame into one of a fixed number of preallocated Mats and returns at
// once; when all are busy the frame is not recorded and the drop is
// counted (the sidecar's src field shows the gap to replay). Write and
// Close are for one goroutine; Drops and Err are safe from any.
type Background struct {
	r     *Recorder
	queue chan bgItem
	free  chan *gocv.Mat
	mats  []*gocv.Mat
	done  chan struct{}
	drops atomic.Uint64
	// recorded mirrors r.Frames() for readers on other goroutines.
	recorded atomic.Uint64
	mu       sync.Mutex
	err      error
	once     sync.Once
}

type bgItem struct {
	m    *gocv.Mat
	info capture.FrameInfo
}

// NewBackground starts recording through r with depth frame buffers
// (default 8 when depth <= 0). Background owns r from now on: close it
// through Background.Close.
func NewBackground(r *Recorder, depth int) *Background {
	if depth <= 0 {
		depth = 8
	}
	b := &Background{r: r, queue: make(chan bgItem, depth), free: make(chan *gocv.Mat, depth), done: make(chan struct{})}
	for i := 0; i < depth; i++ {
		m := gocv.NewMat()
		b.mats = append(b.mats, &m)
		b.free <- &m
	}
	go b.loop()
	return b
}

func (b *Background) loop() {
	defer close(b.done)
	for it := range b.queue {
		_ = b.r.Write(*it.m, it.info) // cannot fail: checked in Write
		b.recorded.Store(uint64(b.r.Frames()))
		if err := b.r.Err(); err != nil {
			b.mu.Lock()
			b.err = err
			b.mu.Unlock()
		}
		b.free <- it.m
	}
}

// Write queues a copy of frame (8-bit BGR; not retained). It never blocks
// and returns an error only for a frame that is not 8-bit BGR.
func (b *Background) Write(frame gocv.Mat, info capture.FrameInfo) error {
	if frame.Empty() || frame.Type() != gocv.MatTypeCV8UC3 {
		return fmt.Errorf("record: frame %d is not 8-bit BGR", info.Index)
	}
	select {
	case m := <-b.free:
		frame.CopyTo(m)
		b.queue <- bgItem{m: m, info: info} // cannot block: depth items at most
	default:
		b.drops.Add(1)
	}
	return nil
}

// Drops is the number of frames not recorded because the encoder was
// behind.
func (b *Background) Drops() uint64 { return b.drops.Load() }

// Recorded is the number of frames recorded so far; safe from any
// goroutine while recording goes on (unlike Recorder().Frames()).
func (b *Background) Recorded() uint64 { return b.recorded.Load() }

// Err is why recording stopped, or nil.
func (b *Background) Err() error {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.err
}

// Recorder gives access to the Recorder's Files and Frames after Close.
func (b *Background) Recorder() *Recorder { return b.r }

// Close records the queued frames, finalises the clip and frees the
// buffers. It returns the Recorder's Err.
func (b *Background) Close() error {
	var err error
	b.once.Do(func() {
		close(b.queue)
		<-b.done
		err = b.r.Close()
		for _, m := range b.mats {
			m.Close()
		}
	})
	return err
}
