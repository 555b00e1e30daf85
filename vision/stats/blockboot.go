package stats

import (
	"errors"
	"fmt"
	"math"

	"tilebench/internal/seeds"
)

// Sequences holds per-frame values (a drift, a 0/1 agreement) grouped by
// recorded sequence, in frame order. Frames within a sequence are
// correlated, so intervals resample sequences or blocks of frames, never
// single frames.
type Sequences [][]float64

// Frames is the total number of frames.
func (s Sequences) Frames() int {
	n := 0
	for _, x := range s {
		n += len(x)
	}
	return n
}

// Mean is the pooled mean over every frame of every sequence (NaN when
// there are none).
func (s Sequences) Mean() float64 {
	sum, n := 0.0, 0
	for _, x := range s {
		for _, v := range x {
			sum += v
		}
		n += len(x)
	}
	if n == 0 {
		return math.NaN()
	}
	return sum / float64(n)
}

func (s Sequences) check(what string) error {
	if s.Frames() == 0 {
		return fmt.Errorf("%s: no frames", what)
	}
	for k, x := range s {
		for i, v := range x {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("%s: sequence %d frame %d is %v", what, k, i, v)
			}
		}
	}
	return nil
}

// MinWholeSequences is the fewest sequences SequenceMean resamples whole;
// with fewer it uses the moving-block bootstrap over the frames. Ten is
// common practice for a cluster bootstrap to mean anything.
const MinWholeSequences = 10

// Resampling methods SequenceMean reports.
const (
	MethodWholeSequence = "whole-sequence bootstrap"
	MethodMovingBlock   = "moving-block bootstrap"
)

// SequenceMean estimates the pooled per-frame mean of s with a percentile
// bootstrap interval that respects the correlation of frames within a
// sequence. With at least MinWholeSequences sequences it resamples whole
// sequences (WholeSequenceMean); otherwise it runs the moving-block
// bootstrap (MovingBlockMean) over the frames of all sequences joined in
// order, with block length ceil(n^(1/3)) (common practice; the order of
// the optimal length for a mean, Hall, Horowitz & Jing 1995, from memory).
// method names what was done.
func (b Bootstrap) SequenceMean(s Sequences) (e Estimate, method string, err error) {
	if len(s) >= MinWholeSequences {
		e, err = b.WholeSequenceMean(s)
		return e, MethodWholeSequence, err
	}
	var all []float64
	for _, x := range s {
		all = append(all, x...)
	}
	l := int(math.Ceil(math.Cbrt(float64(len(all)))))
	e, err = b.MovingBlockMean(all, l)
	return e, MethodMovingBlock, err
}

// WholeSequenceMean is the pooled mean of s with the percentile interval
// of the cluster bootstrap: each resample draws len(s) sequences with
// replacement and takes the pooled mean of their frames (the ratio of the
// drawn totals to the drawn frame counts). Empty sequences count with
// weight zero.
func (b Bootstrap) WholeSequenceMean(s Sequences) (Estimate, error) {
	theta, e, err := b.wholeReplicates(s)
	if err != nil {
		return e, err
	}
	e.Lo, e.Hi = interval(theta, e.Level)
	return e, nil
}

func (b Bootstrap) wholeReplicates(s Sequences) ([]float64, Estimate, error) {
	B, lv, err := b.Params()
	if err != nil {
		return nil, Estimate{}, err
	}
	if err := s.check("whole-sequence bootstrap"); err != nil {
		return nil, Estimate{}, err
	}
	if len(s) < 2 {
		return nil, Estimate{}, errors.New("whole-sequence bootstrap: needs at least 2 sequences")
	}
	sums := make([]float64, len(s))
	lens := make([]float64, len(s))
	for k, x := range s {
		for _, v := range x {
			sums[k] += v
		}
		lens[k] = float64(len(x))
	}
	e := Estimate{Value: s.Mean(), Level: lv, Resamples: B}
	theta := make([]float64, B)
	r := seeds.NewRand(b.Seed)
	m := len(s)
	for i := range theta {
		var tot, n float64
		for j := 0; j < m; j++ {
			k := r.IntN(m)
			tot += sums[k]
			n += lens[k]
		}
		if n == 0 {
			// Every draw an empty sequence: no frames, fall back to the
			// full-data value (possible only with empty sequences).
			theta[i] = e.Value
			continue
		}
		theta[i] = tot / n
	}
	return theta, e, nil
}

// MovingBlockMean is the mean of x with the percentile interval of the
// moving-block bootstrap (Künsch 1989, "The jackknife and the bootstrap
// for general stationary observations", Annals of Statistics 17): the
// n−l+1 overlapping blocks x[j:j+l] are the units; each resample joins
// ceil(n/l) blocks drawn uniformly with replacement, cut to n values, and
// takes their mean. l is clamped to 1..n; l = 1 is the ordinary bootstrap.
func (b Bootstrap) MovingBlockMean(x []float64, l int) (Estimate, error) {
	theta, e, err := b.blockReplicates(x, l)
	if err != nil {
		return e, err
	}
	e.Lo, e.Hi = interval(theta, e.Level)
	return e, nil
}

func (b Bootstrap) blockReplicates(x []float64, l int) ([]float64, Estimate, error) {
	B, lv, err := b.Params()
	if err != nil {
		return nil, Estimate{}, err
	}
	if err := (Sequences{x}).check("moving-block bootstrap"); err != nil {
		return nil, Estimate{}, err
	}
	n := len(x)
	l = min(max(l, 1), n)
	// Prefix sums make each block's sum one subtraction.
	pre := make([]float64, n+1)
	for i, v := range x {
		pre[i+1] = pre[i] + v
	}
	starts := n - l + 1
	k := (n + l - 1) / l
	last := n - (k-1)*l // length of the cut last block
	e := Estimate{Value: Mean(x), Level: lv, Resamples: B}
	theta := make([]float64, B)
	r := seeds.NewRand(b.Seed)
	for i := range theta {
		var tot float64
		for j := 0; j < k; j++ {
			s := r.IntN(starts)
			ln := l
			if j == k-1 {
				ln = last
			}
			tot += pre[s+ln] - pre[s]
		}
		theta[i] = tot / float64(n)
	}
	return theta, e, nil
}
