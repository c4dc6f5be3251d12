//go:build unix

// Package benchcpu reports the CPU time of a benchmark's own thread beside its wall time.
//
// On a shared machine ns/op also counts the time other processes held the core; the thread's
// CPU time (getrusage RUSAGE_THREAD) does not. The garbage collector's background work on other
// threads is not in it.
package benchcpu

import (
	"runtime"
	"syscall"
	"testing"
	"time"
)

// rusageThread is RUSAGE_THREAD on Linux.
const rusageThread = 1

// Clock is a started measurement of the calling goroutine's thread.
type Clock struct{ start time.Duration }

func threadCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(rusageThread, &ru); err != nil {
		return -1
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// Start locks the goroutine to its thread and notes the thread's CPU time.
func Start() Clock {
	runtime.LockOSThread()
	return Clock{start: threadCPU()}
}

// Report unlocks the thread and reports the CPU time since Start per iteration as cpu-ns/op.
func (c Clock) Report(b *testing.B) {
	end := threadCPU()
	runtime.UnlockOSThread()
	if c.start >= 0 && end >= 0 && b.N > 0 {
		b.ReportMetric(float64(end-c.start)/float64(b.N), "cpu-ns/op")
	}
}
