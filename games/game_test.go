package games

import (
	"errors"
	"math"
	"strings"
	"testing"
)

func TestControlsCheck(t *testing.T) {
	cont := Controls{Kind: Continuous, Names: []string{"a", "b"}, Low: []float64{-1, 0}, High: []float64{1, 1}}
	disc := Controls{Kind: Discrete, Names: []string{"l", "s", "r"}}
	good := []struct {
		sp Controls
		a  []float64
	}{{cont, []float64{0, 0.5}}, {cont, []float64{-7, 9}}, {disc, []float64{0}}, {disc, []float64{2}}}
	for _, c := range good {
		if err := c.sp.Check(c.a); err != nil {
			t.Errorf("%v: %v", c.a, err)
		}
	}
	bad := []struct {
		sp Controls
		a  []float64
	}{{cont, []float64{0}}, {cont, []float64{math.NaN(), 0}}, {cont, []float64{0, math.Inf(-1)}},
		{disc, []float64{3}}, {disc, []float64{-1}}, {disc, []float64{1.5}}, {disc, []float64{}}, {disc, []float64{math.NaN()}}}
	for _, c := range bad {
		if err := c.sp.Check(c.a); !errors.Is(err, ErrBadAction) {
			t.Errorf("%v: err %v, want ErrBadAction", c.a, err)
		}
	}
	if cont.Dim() != 2 || disc.Dim() != 1 || disc.Choices() != 3 || cont.Choices() != 0 {
		t.Error("Dim/Choices")
	}
}

func TestVariationSetApply(t *testing.T) {
	type cfg struct{ a, b int }
	vs := VariationSet[cfg]{
		{Name: "one", Group: "a", Edit: func(c *cfg) { c.a = 1 }, Doc: "a=1"},
		{Name: "two", Group: "a", Edit: func(c *cfg) { c.a = 2 }, Doc: "a=2"},
		{Name: "bee", Group: "b", Edit: func(c *cfg) { c.b = 5 }, Doc: "b=5"},
	}
	var c cfg
	canon, err := vs.Apply("g", "two+bee+two", &c)
	if err != nil || canon != "bee+two" || c != (cfg{2, 5}) {
		t.Fatalf("canon %q, cfg %+v, err %v", canon, c, err)
	}
	for _, s := range []string{"one+two", "three", "+", "bee+"} {
		c = cfg{}
		if _, err := vs.Apply("g", s, &c); err == nil || !strings.HasPrefix(err.Error(), "g: ") {
			t.Errorf("%q: err %v", s, err)
		}
	}
	if canon, err := vs.Apply("g", "default", &c); canon != "" || err != nil {
		t.Errorf("default: %q %v", canon, err)
	}
	if vs.Doc("bee") != "b=5" || vs.Doc("x") != "" || len(vs.Names()) != 3 {
		t.Error("Doc/Names")
	}
}

func TestSeedRangesDisjoint(t *testing.T) {
	if Train(0) != TrainSeedStart || HeldOut(0) != HeldOutSeedStart {
		t.Fatal("first seeds")
	}
	if TrainSeedStart+SeedRangeLen > HeldOutSeedStart {
		t.Fatal("training and held-out ranges overlap")
	}
	for r, w := range map[EndReason]string{NotEnded: "running", Completed: "completed", Failed: "failed", TimeUp: "time-up"} {
		if r.String() != w {
			t.Errorf("%d: %q", int(r), r.String())
		}
	}
}
