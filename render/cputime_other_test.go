//go:build !linux

package render

import "time"

// threadCPU is not available here: CPU medians read 0.
func threadCPU() time.Duration { return 0 }
