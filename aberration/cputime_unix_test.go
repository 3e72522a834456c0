//go:build unix

package aberration_test

import "syscall"

// cpuSeconds returns the CPU time (user and system) this process has used,
// so that the benchmark and the validation table can report the cost of an
// estimate per CPU-second, which other load on a shared machine disturbs
// much less than its wall-clock time.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)*1e-6
}
