package nets

import (
	"fmt"
	"math"
	"testing"

	"tilebench/vision"
)

// blankTokens zeroes every token i with i%every == 1 (and, with negZero,
// writes −0 over token 2, which is not blank), as black occlusion does.
func blankTokens(obs *vision.Observation, every int, negZero bool) int {
	ts := obs.Tokens
	blank := 0
	for i := 0; i < ts.N; i++ {
		if i%every == 1 {
			clear(ts.Data[i*ts.D : (i+1)*ts.D])
			blank++
		}
	}
	if negZero && ts.N > 2 {
		row := ts.Data[2*ts.D : 3*ts.D]
		for j := range row {
			row[j] = float32(math.Copysign(0, -1))
		}
	}
	return blank
}

// Acting on a set with blank tokens runs each per-token layer once for all
// of them; the action must be bit for bit the one of the full forward
// pass, which computes every token (the property that keeps recorded
// studies and trainings reproducible), for every attention configuration.
// Forward itself is checked against testdata/ref/nets_ref.py (ref_test.go).
func TestInferMatchesForward(t *testing.T) {
	cfgs := []Config{
		{},
		{Centre: true},
		{Centre: true, KeyHidden: 8},
		{Family: PosAttention, Centre: true},
		{Family: PosAttention},
		{Value: "identity", Centre: true},
		{Centre: true, Context: 2},       // falls back to the full pass
		{Centre: true, PrevAction: true}, // likewise
	}
	for _, p := range []int{5, 8} {
		g := testGrid(t, 40, 30, p)
		if p == 5 {
			g = testGrid(t, 35, 25, p) // odd token width: rows not 8-byte aligned
		}
		for ci, cfg := range cfgs {
			for _, every := range []int{2, 3, 1 << 30} {
				t.Run(fmt.Sprintf("p%d/cfg%d/every%d", p, ci, every), func(t *testing.T) {
					a := mustNew(t, cfg, g, contSpace, 7)
					b := mustNew(t, cfg, g, contSpace, 7)
					for step := uint64(0); step < 3; step++ {
						obs := randomObs(g, 11+step, contSpace.Dim())
						blankTokens(obs, every, step == 1)
						want := make([]float32, 3)
						if err := a.Forward(obs, want); err != nil {
							t.Fatal(err)
						}
						got := make([]float64, 3)
						if err := b.Act(obs, got); err != nil {
							t.Fatal(err)
						}
						for i := range want {
							if math.Float64bits(got[i]) != math.Float64bits(float64(want[i])) {
								t.Fatalf("step %d action %d: Act %v, Forward %v", step, i, got[i], want[i])
							}
						}
					}
				})
			}
		}
	}
}

// Every blank token shares one row, so the per-token layers see one row
// more than the number of non-blank tokens.
func TestCompactRows(t *testing.T) {
	g := testGrid(t, 40, 30, 5)
	n := mustNew(t, Config{Centre: true}, g, contSpace, 1).(*attnNet)
	obs := randomObs(g, 3, contSpace.Dim())
	blank := blankTokens(obs, 3, false)
	_, _, rows, slot, ok, err := n.in.compact(obs, g)
	if err != nil || !ok {
		t.Fatalf("compact: ok %v, %v", ok, err)
	}
	if want := obs.Tokens.N - blank + 1; rows != want {
		t.Errorf("%d rows, want %d (%d tokens, %d blank)", rows, want, obs.Tokens.N, blank)
	}
	for i, s := range slot {
		if (i%3 == 1) != (int(s) == rows-1) {
			t.Errorf("token %d reads row %d of %d", i, s, rows)
		}
	}
	full := randomObs(g, 4, contSpace.Dim())
	if _, _, _, _, ok, _ := n.in.compact(full, g); ok {
		t.Error("compact built rows for a set with no blank token")
	}
}

func TestBlankRow(t *testing.T) {
	buf := make([]float32, 48)
	for start := 0; start < 3; start++ {
		for n := 0; n <= 44; n++ {
			row := buf[start : start+n]
			if !blankRow(row) {
				t.Errorf("zero row [%d:%d] not blank", start, start+n)
			}
			for j := range row {
				row[j] = float32(math.Copysign(0, -1))
				if blankRow(row) {
					t.Errorf("row [%d:%d] with −0 at %d is blank", start, start+n, j)
				}
				row[j] = 0
			}
		}
	}
}

// BenchmarkAttentionActOccluded is the centred default step on a set
// with 30% of its tokens black, as `--occlude random:0.3` leaves it.
func BenchmarkAttentionActOccluded(b *testing.B) {
	g := testGrid(b, 112, 80, 8)
	n := mustNew(b, Config{Centre: true}, g, contSpace, 1)
	obs := RandomObservation(g, contSpace, 2)
	rng := testRand(3)
	ts := obs.Tokens
	for _, i := range rng.Perm(ts.N)[:int(math.RoundToEven(0.3*float64(ts.N)))] {
		clear(ts.Data[i*ts.D : (i+1)*ts.D])
	}
	a := make([]float64, 3)
	b.ReportAllocs()
	for b.Loop() {
		if err := n.Act(obs, a); err != nil {
			b.Fatal(err)
		}
	}
}
