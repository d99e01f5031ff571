package tiles

import (
	"context"
	"errors"
	"sync/atomic"
	"testing"
)

// TestEach: every item runs once for any worker count, and the first
// error by item order is returned (known by construction).
func TestEach(t *testing.T) {
	for _, workers := range []int{1, 2, 7} {
		var ran [20]atomic.Int32
		if err := Each(context.Background(), 20, workers, func(i int) error { ran[i].Add(1); return nil }); err != nil {
			t.Fatal(err)
		}
		for i := range ran {
			if ran[i].Load() != 1 {
				t.Errorf("%d workers: item %d ran %d times", workers, i, ran[i].Load())
			}
		}
		err := Each(context.Background(), 20, workers, func(i int) error {
			if i == 3 {
				return errors.New("three")
			}
			return nil
		})
		if err == nil || err.Error() != "three" {
			t.Errorf("%d workers: error %v, want three", workers, err)
		}
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := Each(ctx, 5, 2, func(int) error { return nil }); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v", err)
	}
}
