package patch

import (
	"os"
	"sort"
	"testing"
	"time"
)

// TestSpeedMedians times single frames, interleaving Tokenize (96×96 RGBA,
// patch 8) with the plain copy of the same output bytes, and logs the
// median of each: on a busy shared machine the median of single frames is
// steadier than a benchmark's mean. testdata/ref/tokenize_speed.py reads
// the "speed:" line. Runs only with TILEBENCH_SPEED=1.
func TestSpeedMedians(t *testing.T) {
	if os.Getenv("TILEBENCH_SPEED") != "1" {
		t.Skip("set TILEBENCH_SPEED=1 to time single frames")
	}
	tk, f, ts := benchSetup(t)
	src := make([]float32, len(ts.Data))
	const n = 4001
	var tok, cp []float64
	for i := 0; i < n; i++ {
		s := time.Now()
		if err := tk.Tokenize(f, ts); err != nil {
			t.Fatal(err)
		}
		tok = append(tok, float64(time.Since(s)))
		s = time.Now()
		copy(ts.Data, src)
		cp = append(cp, float64(time.Since(s)))
	}
	sort.Float64s(tok)
	sort.Float64s(cp)
	t.Logf("speed: tokenize_ns=%.0f copy_ns=%.0f ratio=%.3f simd=%v", tok[n/2], cp[n/2], cp[n/2]/tok[n/2], haveSIMD)
}
