package tiles

// Later is a result computed on a goroutine of its own while the caller
// goes on: work whose result the steps after it need only later, such as
// the ground area of every cell of a grid, measured while the dates are
// read and fitted. Its result is the same whenever it is asked for.
type Later[T any] struct {
	done  chan struct{}
	value T
	err   error
}

// Start runs do on a goroutine of its own and returns at once.
func Start[T any](do func() (T, error)) *Later[T] {
	l := &Later[T]{done: make(chan struct{})}
	go func() {
		defer close(l.done)
		l.value, l.err = do()
	}()
	return l
}

// Done returns a result that is already known, for callers that have
// nothing to compute but hold a Later.
func Done[T any](value T, err error) *Later[T] {
	l := &Later[T]{done: make(chan struct{}), value: value, err: err}
	close(l.done)
	return l
}

// Wait returns do's result, waiting for it if it is not ready; any number
// of goroutines may wait, as often as they like.
func (l *Later[T]) Wait() (T, error) {
	<-l.done
	return l.value, l.err
}
