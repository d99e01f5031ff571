package tiles

import (
	"context"
	"sync"
)

// Each runs do(i) for i = 0 ... n-1 on up to workers goroutines (items
// that are not tiles, such as the pairs of a series whose models are
// fitted independently). do must write only to its own item's results. The
// first error by item order is returned; after an error or a cancelled
// ctx no new item starts.
func Each(ctx context.Context, n, workers int, do func(i int) error) error {
	workers = max(1, min(workers, n))
	errs := make([]error, n)
	var next int
	var mu sync.Mutex
	var wg sync.WaitGroup
	failed := false
	take := func() (int, bool) {
		mu.Lock()
		defer mu.Unlock()
		if failed || next >= n || ctx.Err() != nil {
			return 0, false
		}
		next++
		return next - 1, true
	}
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i, ok := take()
				if !ok {
					return
				}
				if errs[i] = do(i); errs[i] != nil {
					mu.Lock()
					failed = true
					mu.Unlock()
				}
			}
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return ctx.Err()
}
