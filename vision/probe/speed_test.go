package probe

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"

	"tilebench/internal/reftest"
)

// zeroRecording writes a .npy of n black frames of w×h×3 without holding
// them: the header, then a file extended to its full size (sparse where
// the file system allows).
func zeroRecording(t testing.TB, path string, n, w, h int) {
	t.Helper()
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	hdr := fmt.Sprintf("{'descr': '|u1', 'fortran_order': False, 'shape': (%d, %d, %d, 3), }", n, h, w)
	for (10+len(hdr)+1)%64 != 0 {
		hdr += " "
	}
	hdr += "\n"
	b := append([]byte("\x93NUMPY\x01\x00"), byte(len(hdr)), byte(len(hdr)>>8))
	b = append(b, hdr...)
	if _, err := f.Write(b); err != nil {
		t.Fatal(err)
	}
	if err := f.Truncate(int64(len(b)) + int64(n)*int64(w*h*3)); err != nil {
		t.Fatal(err)
	}
}

// Floors TestBatchSpeed holds batches of 64 to, against one frame per
// message, on 10,000 frames of 96×96×3 through the NumPy example
// (medians of alternated runs in one process). The target is 10×
// for the whole probe; docs/probe.md ("Throughput") shows why this frame
// size cannot reach it: the policy's start and stop, paid once by both
// modes, and the copy of 27 KB a frame out of the pipe into Python, paid
// per frame by both. On this 2-core machine, shared, batches give about
// 2× for the whole probe and 4× for frames past the first sequence; the
// floors leave room for a loaded machine.
const (
	minWholeRatio  = 1.5
	minSteadyRatio = 2.5
)

// TestBatchSpeed measures, in one run, probing 10,000 frames of 96×96×3
// (the clean cell: 20,000 policy calls, ten sequences of 1,000 frames)
// through examples/policy_numpy.py with batches of 64 and with one frame
// per message, five times each, alternated, and logs the median
// wall-clock and CPU ratios of the whole probe and of the steady state
// (from the end of the first sequence to the end of the last: no policy
// start or stop), and what the policy's start and stop cost. It fails
// below the floors above. Opt in with TILEBENCH_SPEED=1 (about a
// minute).
func TestBatchSpeed(t *testing.T) {
	if os.Getenv("TILEBENCH_SPEED") != "1" {
		t.Skip("set TILEBENCH_SPEED=1 to measure")
	}
	reftest.Need(t, "numpy")
	dir := t.TempDir()
	rec := filepath.Join(dir, "rec.npy")
	const frames, seqs = 10000, 10
	zeroRecording(t, rec, frames, 96, 96)
	eps := filepath.Join(dir, "episodes.csv")
	var sb strings.Builder
	for i := 0; i < seqs; i++ {
		fmt.Fprintln(&sb, i*frames/seqs)
	}
	if err := os.WriteFile(eps, []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	target := "exec:" + reftest.Python + " " + numpyExample
	// Black frames would give the rule nothing to do; the transform
	// cell is left out so both runs do the same 20,000 calls.
	cpu := func() time.Duration {
		var self, kids syscall.Rusage
		syscall.Getrusage(syscall.RUSAGE_SELF, &self)
		syscall.Getrusage(syscall.RUSAGE_CHILDREN, &kids)
		tv := func(v syscall.Timeval) time.Duration { return time.Duration(v.Nano()) }
		return tv(self.Utime) + tv(self.Stime) + tv(kids.Utime) + tv(kids.Stime)
	}
	type run struct{ wall, cpu, steady time.Duration }
	timeOf := func(noBatch bool, i int) run {
		p := plan(t, Config{In: rec, Episodes: eps, Policy: target, ActionSpace: "continuous:2", NoBatch: noBatch, Resamples: 100})
		var first, last time.Time
		start, c0 := time.Now(), cpu()
		_, err := Run(context.Background(), p, Options{Dir: filepath.Join(dir, fmt.Sprintf("o-%v-%d", noBatch, i)), Workers: 1, NoReport: true,
			Progress: func(done, total int) {
				if done == 1 {
					first = time.Now()
				}
				last = time.Now()
			}})
		if err != nil {
			t.Fatal(err)
		}
		return run{time.Since(start), cpu() - c0, last.Sub(first)}
	}
	// The policy's start and stop alone, as Run pays them once.
	openClose := func() time.Duration {
		p := plan(t, Config{In: rec, Episodes: eps, Policy: target, ActionSpace: "continuous:2", Resamples: 100})
		ps := p.Cells[0].Patch
		grid, err := p.grid(ps)
		if err != nil {
			t.Fatal(err)
		}
		start := time.Now()
		pol, err := Policies(p, "")(ps, grid)
		if err != nil {
			t.Fatal(err)
		}
		pol.(interface{ Close() error }).Close()
		return time.Since(start)
	}
	var single, batch []run
	var opens []time.Duration
	for i := 0; i < 5; i++ {
		if i%2 == 0 {
			batch = append(batch, timeOf(false, i))
			single = append(single, timeOf(true, i))
		} else {
			single = append(single, timeOf(true, i))
			batch = append(batch, timeOf(false, i))
		}
		opens = append(opens, openClose())
	}
	med := func(rs []run, f func(run) time.Duration) time.Duration {
		d := make([]time.Duration, len(rs))
		for i, r := range rs {
			d[i] = f(r)
		}
		slices.Sort(d)
		return d[len(d)/2]
	}
	slices.Sort(opens)
	wall := func(r run) time.Duration { return r.wall }
	used := func(r run) time.Duration { return r.cpu }
	steady := func(r run) time.Duration { return r.steady }
	ratio := func(f func(run) time.Duration) float64 { return float64(med(single, f)) / float64(med(batch, f)) }
	perFrame := func(rs []run) float64 {
		return float64(med(rs, steady).Nanoseconds()) / 1e3 / float64(2*frames*(seqs-1)/seqs)
	}
	t.Logf("%d frames of 96x96x3 (%d sequences), %d policy calls, medians of %d alternated runs:", frames, seqs, 2*frames, len(batch))
	t.Logf("  whole probe: one per message %v, batches of 64 %v: %.1fx; CPU (both processes) %v vs %v: %.1fx",
		med(single, wall), med(batch, wall), ratio(wall), med(single, used), med(batch, used), ratio(used))
	t.Logf("  steady state (sequences 2..%d): %.1f vs %.1f us a call: %.1fx", seqs, perFrame(single), perFrame(batch), ratio(steady))
	t.Logf("  the policy's start and stop alone: %v (paid once by both)", opens[len(opens)/2])
	t.Logf("  the issue's target: 10x for the whole probe; held here: %.1fx whole, %.1fx steady (docs/probe.md, \"Throughput\", on why 96x96x3 stays below 10x)", minWholeRatio, minSteadyRatio)
	if r := ratio(wall); r < minWholeRatio {
		t.Errorf("whole probe %.1fx faster with batches, want at least %.1fx", r, minWholeRatio)
	}
	if r := ratio(steady); r < minSteadyRatio {
		t.Errorf("steady state %.1fx faster with batches, want at least %.1fx", r, minSteadyRatio)
	}
}
