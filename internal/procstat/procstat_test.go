package procstat_test

import (
	"os"
	"syscall"
	"testing"
	"time"

	"github.com/kinchain/kinchain/internal/procstat"
)

// rusage is this process's user + system CPU time from getrusage(2), the
// kernel's other account of the same clock.
func rusage(t *testing.T) time.Duration {
	t.Helper()
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		t.Fatal(err)
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// TestCPU: /proc/self/stat agrees with getrusage(2) to within the ticks
// of both fields (10 ms each) after some work.
func TestCPU(t *testing.T) {
	x := 0.0
	for start := rusage(t); rusage(t)-start < 200*time.Millisecond; { // CPU, not wall, time
		for i := 0; i < 1000; i++ {
			x += float64(i) * 1e-9
		}
	}
	got, err := procstat.CPU(os.Getpid())
	want := rusage(t)
	if err != nil {
		t.Fatal(err)
	}
	if d := got - want; d < -30*time.Millisecond || d > 30*time.Millisecond {
		t.Errorf("CPU = %v, getrusage %v (x %v)", got, want, x)
	}
	if got < 190*time.Millisecond {
		t.Errorf("CPU = %v after 200 ms of work", got)
	}
	if _, err := procstat.CPU(-1); err == nil {
		t.Error("no error for pid -1")
	}
}

// TestRSS: touching 64 MiB raises the resident set and its peak by about
// that much; after the reset the peak is the current resident set again.
func TestRSS(t *testing.T) {
	pid := os.Getpid()
	rss0, err := procstat.RSS(pid)
	if err != nil {
		t.Fatal(err)
	}
	b := make([]byte, 64<<20)
	for i := range b {
		if i%4096 == 0 {
			b[i] = 1
		}
	}
	rss1, err := procstat.RSS(pid)
	if err != nil {
		t.Fatal(err)
	}
	peak, err := procstat.PeakRSS(pid)
	if err != nil {
		t.Fatal(err)
	}
	if rss1-rss0 < 60<<20 || peak < rss1 {
		t.Errorf("RSS %d → %d MiB after touching 64 MiB, peak %d MiB", rss0>>20, rss1>>20, peak>>20)
	}
	if err := procstat.ResetPeakRSS(pid); err != nil {
		t.Skipf("clear_refs not writable here: %v", err)
	}
	peak2, _ := procstat.PeakRSS(pid)
	rss2, _ := procstat.RSS(pid)
	if peak2 > rss2+8<<20 {
		t.Errorf("after the reset the peak is %d MiB, the resident set %d MiB", peak2>>20, rss2>>20)
	}
}
