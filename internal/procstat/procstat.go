// Package procstat reads a Linux process's CPU time and resident memory
// from /proc, as proc(5) documents them — the server-side figures of
// kinchain's load script (internal/server/loadgen) and of the capacity
// benchmark in deploy/, which run the server as a process of its own —
// and this process's CPU time (Self), which the benchmarks report.
package procstat

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"strconv"
	"strings"
	"syscall"
	"time"
)

// userHZ is the unit of the CPU times in /proc/<pid>/stat: clock ticks of
// USER_HZ, 100 per second in Linux's user-space ABI whatever the kernel's
// own tick rate (proc(5), sysconf(_SC_CLK_TCK)).
const userHZ = 100

// CPU returns the user + system CPU time process pid has used so far
// (fields 14 and 15 of /proc/<pid>/stat), at a resolution of 10 ms.
func CPU(pid int) (time.Duration, error) {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return 0, err
	}
	// Field 2, the command name, is in parentheses and may hold spaces
	// and parentheses: the fields resume after the last ')'.
	i := bytes.LastIndexByte(b, ')')
	if i < 0 {
		return 0, errors.New("procstat: no command name in /proc stat")
	}
	f := strings.Fields(string(b[i+1:])) // f[0] is field 3, the state
	if len(f) < 13 {
		return 0, errors.New("procstat: short /proc stat")
	}
	ut, err1 := strconv.ParseInt(f[11], 10, 64)
	st, err2 := strconv.ParseInt(f[12], 10, 64)
	if err := errors.Join(err1, err2); err != nil {
		return 0, fmt.Errorf("procstat: utime/stime: %w", err)
	}
	return time.Duration(ut+st) * (time.Second / userHZ), nil
}

// Self returns the user + system CPU time this process has used so far,
// from getrusage(2) (microsecond resolution, unlike /proc's ticks); 0 when
// it cannot be read.
func Self() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// RSS returns the resident set of process pid now (VmRSS), bytes.
func RSS(pid int) (int64, error) { return statusKB(pid, "VmRSS") }

// PeakRSS returns the peak resident set of process pid (VmHWM), bytes:
// since it started, or since ResetPeakRSS.
func PeakRSS(pid int) (int64, error) { return statusKB(pid, "VmHWM") }

// ResetPeakRSS sets the peak resident set of process pid to its current
// one (writing "5" to /proc/<pid>/clear_refs).
func ResetPeakRSS(pid int) error {
	return os.WriteFile(fmt.Sprintf("/proc/%d/clear_refs", pid), []byte("5"), 0)
}

// statusKB reads the "key:  N kB" line of /proc/<pid>/status, in bytes.
func statusKB(pid int, key string) (int64, error) {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return 0, err
	}
	for _, l := range strings.Split(string(b), "\n") {
		v, ok := strings.CutPrefix(l, key+":")
		if !ok {
			continue
		}
		f := strings.Fields(v)
		if len(f) != 2 || f[1] != "kB" {
			return 0, fmt.Errorf("procstat: %s: unexpected %q", key, l)
		}
		kb, err := strconv.ParseInt(f[0], 10, 64)
		if err != nil {
			return 0, fmt.Errorf("procstat: %s: %w", key, err)
		}
		return kb << 10, nil
	}
	return 0, fmt.Errorf("procstat: no %s in /proc status", key)
}
