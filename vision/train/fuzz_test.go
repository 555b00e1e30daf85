package train

import (
	"testing"
)

// FuzzCheckpointMeta: the JSON entries of a checkpoint never panic the
// reader, and whatever it accepts has non-negative counts.
func FuzzCheckpointMeta(f *testing.F) {
	st := state{Iter: 3, Elapsed: 12.5, BestVal: 100, Stale: 1, Evals: 40, BestEver: -1.7976931348623157e308,
		Episodes: []episode{{Seed: 7, Steps: 650}}, History: []histRec{{Key: "18446744073709551615", F: -3.5}}}
	f.Add(jsonString(tiny(Clone, 1)), jsonString(st))
	f.Add(jsonString(tiny(CMAES, 2)), `{"iter":1,"history":[{"k":"x","f":1}]}`)
	f.Add(`{"Game":"drive","Patch":-3}`, `{"iter":-1}`)
	f.Add(`{`, `{"elapsed_s":1e999}`)
	f.Add(`{"Budget":"5m"}`, `{"episodes":[{"seed":1,"steps":-5}]}`)
	f.Fuzz(func(t *testing.T, cj, sj string) {
		_, s, err := parseCheckpointMeta(cj, sj)
		if err != nil {
			return
		}
		if s.Iter < 0 || s.Evals < 0 || !(s.Elapsed >= 0) {
			t.Fatalf("accepted state %+v", s)
		}
		for _, e := range s.Episodes {
			if e.Steps < 0 {
				t.Fatalf("accepted episode %+v", e)
			}
		}
	})
}
