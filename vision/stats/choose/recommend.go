// Package choose picks a patch size, or any option with a cost: the
// cheapest candidate shown non-inferior to the best on paired scores
// (Recommender, NonInferiority with Holm's correction), and the
// score-versus-cost Pareto front (ParetoFront). The intervals and tests
// rest on the paired bootstrap of package stats.
package choose

import (
	"fmt"
	"math"

	"tilebench/internal/seeds"
	"tilebench/vision/stats"
)

// Candidate is one option of a recommendation, e.g. one patch size.
type Candidate struct {
	// Name labels the candidate in outputs ("patch 8").
	Name string
	// Cost is what the budget limits (MFLOP per step, µs per step, ...).
	Cost float64
	// Scores are the candidate's normalised episode scores by stratum
	// (condition). All candidates must be paired: the same strata, and in
	// stratum k the same seeds in the same order (see stats.Arms).
	Scores stats.Strata
}

// Recommender picks the cheapest candidate shown to be not worse than
// the best by more than a margin. The zero value is ready to use.
//
// The rule, precisely:
//
//  1. Affordable candidates are those with Cost ≤ Budget (all of them when
//     Budget is 0).
//  2. The best is the affordable candidate with the highest score
//     (Statistic of its pooled scores; ties: lower cost, then lower index).
//  3. Every other affordable candidate c is tested for non-inferiority
//     to the best (NonInferiority: paired bootstrap of score(best) −
//     score(c), one-sided at the Holm-adjusted level, against Margin).
//     The best itself always qualifies.
//  4. The recommendation is the cheapest qualifying candidate (ties:
//     higher score, then lower index). With no qualifying candidate but
//     the best, the best is the pick and Choice.Evidence says how many
//     episodes a cheaper one would need.
type Recommender struct {
	// Bootstrap sets resamples, level and seed of every interval. Candidate
	// i's intervals use seeds.DeriveSeed(Bootstrap.Seed, i, stream).
	Bootstrap stats.Bootstrap
	// Statistic scores a candidate; zero value stats.StatIQM.
	Statistic stats.Statistic
	// Budget is the largest affordable Cost; 0 means no budget. Must not be
	// negative.
	Budget float64
	// Margin is the non-inferiority margin on the normalised scale; 0
	// means DefaultMargin.
	Margin float64
	// Alpha is the family-wise one-sided error rate; 0 means DefaultAlpha.
	Alpha float64
}

// Choice is the outcome of Recommend. Slices are indexed like the
// candidates.
type Choice struct {
	// Pick is the recommended candidate's index, -1 when no candidate is
	// affordable.
	Pick int
	// Best is the best affordable candidate's index, -1 when none.
	Best int
	// Score is each candidate's score with its paired-bootstrap interval.
	Score []stats.Estimate
	// Versus is each affordable candidate's comparison with the best
	// (zero for the others).
	Versus []Comparison
	// Affordable marks the candidates within the budget.
	Affordable []bool
	// Qualifies marks the affordable candidates shown non-inferior.
	Qualifies []bool
	// Margin and Alpha are the values applied.
	Margin, Alpha float64
	// Cheaper is true when some affordable candidate is cheaper than the
	// best; Shown whether one of them qualified. Cheaper && !Shown is
	// "not enough evidence".
	Cheaper, Shown bool
	// More is, when Cheaper && !Shown, the fewest episodes per condition
	// that the cheapest promising candidate (observed difference under
	// the margin) would need, by Comparison.Needed; -1 when no cheaper
	// candidate's difference is under the margin.
	More int
}

// Rule is the one-line description of Recommender's rule, for reports.
const Rule = HolmRule

// Recommend applies the rule documented on Recommender.
func (r Recommender) Recommend(cands []Candidate) (Choice, error) {
	if len(cands) == 0 {
		return Choice{}, fmt.Errorf("recommend: no candidates")
	}
	if r.Budget < 0 || math.IsNaN(r.Budget) {
		return Choice{}, fmt.Errorf("recommend: budget %v is negative", r.Budget)
	}
	if _, _, err := r.Bootstrap.Params(); err != nil {
		return Choice{}, fmt.Errorf("recommend: %w", err)
	}
	n := len(cands)
	ch := Choice{Pick: -1, Best: -1, Score: make([]stats.Estimate, n), Versus: make([]Comparison, n),
		Affordable: make([]bool, n), Qualifies: make([]bool, n), More: -1}
	all := make(stats.Arms, n)
	for i, c := range cands {
		if math.IsNaN(c.Cost) || c.Cost < 0 {
			return Choice{}, fmt.Errorf("recommend: candidate %q cost %v is not a non-negative number", c.Name, c.Cost)
		}
		all[i] = c.Scores
	}
	if err := all.Check("recommend"); err != nil {
		return Choice{}, err
	}
	for i, c := range cands {
		bs := r.Bootstrap
		bs.Seed = seeds.DeriveSeed(r.Bootstrap.Seed, uint64(i), seeds.StreamKey("score"))
		rep, lv, err := single(bs, c.Scores, r.Statistic)
		if err != nil {
			return Choice{}, fmt.Errorf("recommend: candidate %q: %w", c.Name, err)
		}
		ch.Score[i] = rep.Estimate(lv)
		ch.Affordable[i] = r.Budget == 0 || c.Cost <= r.Budget
		if !ch.Affordable[i] {
			continue
		}
		if b := ch.Best; b < 0 || ch.Score[i].Value > ch.Score[b].Value ||
			(ch.Score[i].Value == ch.Score[b].Value && c.Cost < cands[b].Cost) {
			ch.Best = i
		}
	}
	if ch.Best < 0 {
		return ch, nil
	}
	var arms stats.Arms
	var pos []int
	best := 0
	for i := range cands {
		if ch.Affordable[i] {
			if i == ch.Best {
				best = len(arms)
			}
			arms = append(arms, cands[i].Scores)
			pos = append(pos, i)
		}
	}
	ni := NonInferiority{Bootstrap: r.Bootstrap, Statistic: r.Statistic, Margin: r.Margin, Alpha: r.Alpha}
	cmpr, err := ni.Test(arms, best)
	if err != nil {
		return Choice{}, fmt.Errorf("recommend: %w", err)
	}
	ch.Margin, ch.Alpha = ni.Margin, ni.Alpha
	if ch.Margin == 0 {
		ch.Margin = DefaultMargin
	}
	if ch.Alpha == 0 {
		ch.Alpha = DefaultAlpha
	}
	for j, i := range pos {
		ch.Versus[i] = cmpr[j]
		ch.Qualifies[i] = cmpr[j].NonInferior
		c := cands[i]
		if c.Cost < cands[ch.Best].Cost {
			ch.Cheaper = true
			if ch.Qualifies[i] {
				ch.Shown = true
			} else if nd := cmpr[j].Needed; nd > 0 && (ch.More < 0 || nd < ch.More) {
				ch.More = nd
			}
		}
		if !ch.Qualifies[i] {
			continue
		}
		if k := ch.Pick; k < 0 || c.Cost < cands[k].Cost ||
			(c.Cost == cands[k].Cost && ch.Score[i].Value > ch.Score[k].Value) {
			ch.Pick = i
		}
	}
	if ch.Shown {
		ch.More = -1
	}
	return ch, nil
}

// single is the bootstrap of one arm's statistic, with BCa below
// stats.MinPercentileN scores per stratum, and the level of its interval.
func single(b stats.Bootstrap, s stats.Strata, st stats.Statistic) (*stats.Replicates, float64, error) {
	_, lv, err := b.Params()
	if err != nil {
		return nil, 0, err
	}
	rep, err := b.PairedReplicates(stats.Arms{s}, st, func(v []float64) float64 { return v[0] })
	return rep, lv, err
}
