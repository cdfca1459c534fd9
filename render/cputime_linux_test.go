package render

import (
	"time"

	"golang.org/x/sys/unix"
)

// threadCPU returns the CPU time the calling OS thread has used. On a
// machine shared with other work, a frame's CPU time is a steadier measure
// than its wall time (the benchmark locks its goroutine to a thread).
func threadCPU() time.Duration {
	var ts unix.Timespec
	if err := unix.ClockGettime(unix.CLOCK_THREAD_CPUTIME_ID, &ts); err != nil {
		return 0
	}
	return time.Duration(ts.Nano())
}
