package stats

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strconv"

	"tilebench/internal/seeds"
)

// DefaultBreakThreshold is the retention below which an axis counts as
// broken when no threshold is given.
const DefaultBreakThreshold = 0.5

// Level is one severity of a stress axis with the retention measured there.
type Level struct {
	// Severity is the axis value (occlusion ratio, scramble rate, noise
	// token count, ...); larger means harsher.
	Severity float64
	// Retention is stressed / clean score at this severity (see
	// Bootstrap.Retention).
	Retention Estimate
}

// Break is the breaking point of an axis.
type Break struct {
	// Reached is false when retention stayed at or above Threshold at every
	// measured severity; Severity is then NaN.
	Reached bool
	// Severity is the smallest measured severity whose retention point
	// estimate is below Threshold.
	Severity float64
	// Threshold is the retention threshold that was applied.
	Threshold float64
	// Max is the largest severity measured (so "not reached up to Max").
	Max float64
	// Min is the smallest severity measured. A break at Min means the
	// retention was already below Threshold there: in a context with
	// other stress applied, that context alone broke the policy.
	Min float64
}

// AtStart reports whether the break is at the smallest severity measured.
func (b Break) AtStart() bool { return b.Reached && b.Severity == b.Min }

// String returns the severity ("0.3") or "not reached (≤ 0.9)".
func (b Break) String() string {
	if !b.Reached {
		return "not reached (≤ " + strconv.FormatFloat(b.Max, 'g', 4, 64) + ")"
	}
	return strconv.FormatFloat(b.Severity, 'g', 4, 64)
}

// BreakingPoint returns the smallest severity in levels whose retention
// point estimate (Retention.Value) is below threshold; threshold 0 means
// DefaultBreakThreshold. The interval is not used: the rule reads "the
// policy keeps less than half its clean score here", not a significance
// test; report the interval beside it. levels need not be sorted; it is not
// modified. If no level falls below, the Break is not Reached.
func BreakingPoint(levels []Level, threshold float64) (Break, error) {
	if threshold == 0 {
		threshold = DefaultBreakThreshold
	}
	if !(threshold > 0) || math.IsInf(threshold, 0) {
		return Break{}, fmt.Errorf("breaking point: threshold %v must be positive and finite", threshold)
	}
	if len(levels) == 0 {
		return Break{}, fmt.Errorf("breaking point: no severities")
	}
	ls := slices.Clone(levels)
	for _, l := range ls {
		if math.IsNaN(l.Severity) || math.IsInf(l.Severity, 0) {
			return Break{}, fmt.Errorf("breaking point: severity %v is not finite", l.Severity)
		}
		if math.IsNaN(l.Retention.Value) {
			return Break{}, fmt.Errorf("breaking point: retention at severity %v is NaN", l.Severity)
		}
	}
	slices.SortStableFunc(ls, func(a, b Level) int { return cmp.Compare(a.Severity, b.Severity) })
	br := Break{Severity: math.NaN(), Threshold: threshold, Max: ls[len(ls)-1].Severity, Min: ls[0].Severity}
	for _, l := range ls {
		if l.Retention.Value < threshold {
			br.Reached, br.Severity = true, l.Severity
			break
		}
	}
	return br, nil
}

// Point is a (cost, score) pair: lower cost and higher score are better.
type Point struct {
	Cost, Score float64
}

// ParetoFront returns the indices of the points no other point dominates,
// in ascending cost. A point dominates another when its cost is no higher
// and its score no lower, and one of the two is strictly better. Of
// identical points only the first is kept. Points with a NaN coordinate
// are left out.
//
// Example: (1, 5), (2, 4), (3, 7), (4, 7), (5, 9) → indices 0, 2, 4.
func ParetoFront(pts []Point) []int {
	idx := make([]int, 0, len(pts))
	for i, p := range pts {
		if !math.IsNaN(p.Cost) && !math.IsNaN(p.Score) {
			idx = append(idx, i)
		}
	}
	// Ascending cost, then descending score, then index.
	slices.SortStableFunc(idx, func(a, b int) int {
		pa, pb := pts[a], pts[b]
		switch {
		case pa.Cost < pb.Cost:
			return -1
		case pa.Cost > pb.Cost:
			return 1
		case pa.Score > pb.Score:
			return -1
		case pa.Score < pb.Score:
			return 1
		}
		return a - b
	})
	front := idx[:0]
	best := math.Inf(-1)
	for _, i := range idx {
		if pts[i].Score > best {
			front = append(front, i)
			best = pts[i].Score
		}
	}
	return slices.Clone(front)
}

// Candidate is one option of a recommendation, e.g. one patch size.
type Candidate struct {
	// Name labels the candidate in outputs ("patch 8").
	Name string
	// Cost is what the budget limits (MFLOP per step, µs per step, ...).
	Cost float64
	// Scores are the candidate's episode scores by stratum. All candidates
	// must have the same strata (same count, stratum k meaning the same
	// condition for every candidate).
	Scores Strata
}

// Recommender picks the cheapest candidate that is not significantly
// worse than the best. The zero value is ready to use.
//
// The rule, precisely:
//
//  1. Affordable candidates are those with Cost ≤ Budget (all of them when
//     Budget is 0).
//  2. The best is the affordable candidate with the highest score
//     (Statistic of its pooled scores; ties: lower cost, then lower index).
//  3. For every affordable candidate c, P(best > c), the probability of
//     improvement of Agarwal et al. 2021, is estimated with its stratified
//     bootstrap interval. c is "not significantly below the best" when the
//     interval's lower end is at most 0.5, that is, the data do not show
//     that the best beats c in more than half of the pairings. The best
//     itself always qualifies.
//  4. The recommendation is the cheapest qualifying candidate (ties:
//     higher score, then lower index).
type Recommender struct {
	// Bootstrap sets resamples, level and seed of every interval. Candidate
	// i's intervals use seeds.DeriveSeed(Bootstrap.Seed, i, stream).
	Bootstrap Bootstrap
	// Statistic scores a candidate; zero value StatIQM.
	Statistic Statistic
	// Budget is the largest affordable Cost; 0 means no budget. Must not be
	// negative.
	Budget float64
}

// Choice is the outcome of Recommend. Slices are indexed like the
// candidates.
type Choice struct {
	// Pick is the recommended candidate's index, -1 when no candidate is
	// affordable.
	Pick int
	// Best is the best affordable candidate's index, -1 when none.
	Best int
	// Score is each candidate's score with its bootstrap interval.
	Score []Estimate
	// PBest is P(best > candidate) with its interval, for affordable
	// candidates (zero Estimate for the others).
	PBest []Estimate
	// Affordable marks the candidates within the budget.
	Affordable []bool
	// Qualifies marks the affordable candidates not significantly below
	// the best.
	Qualifies []bool
}

// Rule is the one-line description of Recommender's rule, for reports.
const Rule = "the cheapest candidate within the budget that the best does not beat significantly: the lower end of the stratified bootstrap interval (95% by default) of P(best > candidate), the probability of improvement of Agarwal et al. 2021, is at most 0.5"

// Recommend applies the rule documented on Recommender.
func (r Recommender) Recommend(cands []Candidate) (Choice, error) {
	if len(cands) == 0 {
		return Choice{}, fmt.Errorf("recommend: no candidates")
	}
	if r.Budget < 0 || math.IsNaN(r.Budget) {
		return Choice{}, fmt.Errorf("recommend: budget %v is negative", r.Budget)
	}
	if _, _, err := r.Bootstrap.params(); err != nil {
		return Choice{}, fmt.Errorf("recommend: %w", err)
	}
	n := len(cands)
	ch := Choice{Pick: -1, Best: -1, Score: make([]Estimate, n), PBest: make([]Estimate, n),
		Affordable: make([]bool, n), Qualifies: make([]bool, n)}
	for i, c := range cands {
		if math.IsNaN(c.Cost) || c.Cost < 0 {
			return Choice{}, fmt.Errorf("recommend: candidate %q cost %v is not a non-negative number", c.Name, c.Cost)
		}
		if len(c.Scores) != len(cands[0].Scores) {
			return Choice{}, fmt.Errorf("recommend: candidate %q has %d strata, %q has %d", c.Name, len(c.Scores), cands[0].Name, len(cands[0].Scores))
		}
		bs := r.Bootstrap
		bs.Seed = seeds.DeriveSeed(r.Bootstrap.Seed, uint64(i), seeds.StreamKey("score"))
		e, err := bs.CI(c.Scores, r.Statistic)
		if err != nil {
			return Choice{}, fmt.Errorf("recommend: candidate %q: %w", c.Name, err)
		}
		ch.Score[i] = e
		ch.Affordable[i] = r.Budget == 0 || c.Cost <= r.Budget
		if !ch.Affordable[i] {
			continue
		}
		if b := ch.Best; b < 0 || e.Value > ch.Score[b].Value ||
			(e.Value == ch.Score[b].Value && c.Cost < cands[b].Cost) {
			ch.Best = i
		}
	}
	if ch.Best < 0 {
		return ch, nil
	}
	for i, c := range cands {
		if !ch.Affordable[i] {
			continue
		}
		bs := r.Bootstrap
		bs.Seed = seeds.DeriveSeed(r.Bootstrap.Seed, uint64(i), seeds.StreamKey("pbest"))
		p, err := bs.ProbImprovementCI(cands[ch.Best].Scores, c.Scores)
		if err != nil {
			return Choice{}, fmt.Errorf("recommend: candidate %q: %w", c.Name, err)
		}
		ch.PBest[i] = p
		ch.Qualifies[i] = i == ch.Best || p.Lo <= 0.5
		if !ch.Qualifies[i] {
			continue
		}
		if k := ch.Pick; k < 0 || c.Cost < cands[k].Cost ||
			(c.Cost == cands[k].Cost && ch.Score[i].Value > ch.Score[k].Value) {
			ch.Pick = i
		}
	}
	return ch, nil
}
