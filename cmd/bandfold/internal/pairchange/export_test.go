package pairchange

// SetMemoryMapPixels sets the largest change map held in memory for a
// test and returns the previous value.
func SetMemoryMapPixels(n int64) int64 {
	old := memoryMapPixels
	memoryMapPixels = n
	return old
}
