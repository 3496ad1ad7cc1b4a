package report_test

import (
	"context"
	"errors"
	"fmt"
	"sync/atomic"
	"testing"

	"github.com/hewline/hewline/guidance/report"
)

func TestParallelMap(t *testing.T) {
	items := make([]int, 40)
	for i := range items {
		items[i] = i
	}
	var running, peak atomic.Int32
	gate := make(chan struct{})
	go func() {
		for range items {
			gate <- struct{}{}
		}
	}()
	res, errs := report.ParallelMap(context.Background(), items, 3, func(_ context.Context, i int) (string, error) {
		n := running.Add(1)
		for {
			p := peak.Load()
			if n <= p || peak.CompareAndSwap(p, n) {
				break
			}
		}
		<-gate
		running.Add(-1)
		if i%7 == 0 {
			return "", fmt.Errorf("clip %d bad", i)
		}
		return fmt.Sprint(i * i), nil
	})
	if peak.Load() > 3 {
		t.Errorf("%d calls at once, limit 3", peak.Load())
	}
	for i := range items {
		if (i%7 == 0) != (errs[i] != nil) || (errs[i] == nil && res[i] != fmt.Sprint(i*i)) {
			t.Errorf("item %d: %q %v", i, res[i], errs[i])
		}
	}
}

func TestParallelMapCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	called := false
	_, errs := report.ParallelMap(ctx, []int{1, 2}, 1, func(context.Context, int) (int, error) { called = true; return 0, nil })
	if called || !errors.Is(errs[0], context.Canceled) || !errors.Is(errs[1], context.Canceled) {
		t.Errorf("called %v, errs %v", called, errs)
	}
}
