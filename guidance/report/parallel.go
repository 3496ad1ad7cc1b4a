package report

import (
	"context"
	"runtime"
	"sync"
)

// ParallelMap calls fn on every item with at most workers calls at a time
// (workers ≤ 0 means runtime.NumCPU()) and returns the results and errors
// in the items' order. One item's error does not stop the others, so a
// batch replay gets one log per clip even when a clip is bad; once ctx is
// done, items not yet started get ctx.Err() without fn being called.
//
// For "hewline replay" over many clips: one clip per item, fn replaying
// one clip into its own log (and scoring it against its truth).
func ParallelMap[T, R any](ctx context.Context, items []T, workers int, fn func(context.Context, T) (R, error)) ([]R, []error) {
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	res := make([]R, len(items))
	errs := make([]error, len(items))
	next := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < min(workers, len(items)); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				if err := ctx.Err(); err != nil {
					errs[i] = err
					continue
				}
				res[i], errs[i] = fn(ctx, items[i])
			}
		}()
	}
	for i := range items {
		next <- i
	}
	close(next)
	wg.Wait()
	return res, errs
}
