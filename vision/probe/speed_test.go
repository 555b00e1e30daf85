package probe

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"slices"
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

// TestBatchSpeed measures, in one run, probing 10,000 frames of 96×96×3
// (the clean cell: 20,000 policy calls) through examples/policy_numpy.py
// with batches of 64 and one frame per message, three times each, and
// wants the batched median at least 10× faster. Opt in with
// TILEBENCH_SPEED=1 (the machine is shared; it takes tens of seconds).
func TestBatchSpeed(t *testing.T) {
	if os.Getenv("TILEBENCH_SPEED") != "1" {
		t.Skip("set TILEBENCH_SPEED=1 to measure")
	}
	reftest.Need(t, "numpy")
	dir := t.TempDir()
	rec := filepath.Join(dir, "rec.npy")
	zeroRecording(t, rec, 10000, 96, 96)
	// Black frames would give the rule nothing to do; the transform
	// cell is left out so both runs do the same 20,000 calls.
	timeOf := func(noBatch bool, i int) time.Duration {
		p := plan(t, Config{In: rec, Policy: "exec:" + reftest.Python + " " + numpyExample, ActionSpace: "continuous:2", NoBatch: noBatch, Resamples: 100})
		start := time.Now()
		if _, err := Run(context.Background(), p, Options{Dir: filepath.Join(dir, fmt.Sprintf("o-%v-%d", noBatch, i)), Workers: 1, NoReport: true}); err != nil {
			t.Fatal(err)
		}
		return time.Since(start)
	}
	var single, batch []time.Duration
	for i := 0; i < 3; i++ {
		batch = append(batch, timeOf(false, i))
		single = append(single, timeOf(true, i))
	}
	slices.Sort(single)
	slices.Sort(batch)
	ratio := float64(single[1]) / float64(batch[1])
	t.Logf("10000 frames of 96x96x3, clean and transformed: one per message %v, batches of 64 %v (medians of 3): %.1fx", single[1], batch[1], ratio)
	if ratio < 10 {
		t.Errorf("batched probing is %.1fx faster, want at least 10x", ratio)
	}
}
