package tiles

import (
	"errors"
	"sync"
	"testing"
)

// TestLaterWaitsForItsResult: Wait returns what the function returned, to
// every caller, and only once it has returned.
func TestLaterWaitsForItsResult(t *testing.T) {
	release := make(chan struct{})
	calls := 0
	l := Start(func() (int, error) {
		calls++
		<-release
		return 42, nil
	})
	select {
	case <-l.done:
		t.Fatal("the result was ready before the function returned")
	default:
	}
	close(release)
	var wg sync.WaitGroup
	got := make([]int, 4)
	for i := range got {
		wg.Add(1)
		go func() {
			defer wg.Done()
			got[i], _ = l.Wait()
		}()
	}
	wg.Wait()
	for i, v := range got {
		if v != 42 {
			t.Errorf("waiter %d got %d, want 42", i, v)
		}
	}
	if calls != 1 {
		t.Errorf("the function ran %d times, want once", calls)
	}
}

func TestLaterKeepsItsError(t *testing.T) {
	bad := errors.New("no CRS")
	l := Start(func() (string, error) { return "", bad })
	for range 2 {
		if _, err := l.Wait(); !errors.Is(err, bad) {
			t.Fatalf("Wait: %v, want %v", err, bad)
		}
	}
	if v, err := Done("ready", nil).Wait(); v != "ready" || err != nil {
		t.Fatalf("Done: %q, %v", v, err)
	}
}
