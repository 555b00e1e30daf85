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
	// Reached is false when no measured severity broke the policy;
	// Severity is then NaN.
	Reached bool
	// Severity is the smallest measured severity that broke the policy:
	// for BreakingPoint the first whose whole retention interval lies
	// below Threshold, for DriftBreak the first whose whole drift
	// interval lies past it.
	Severity float64
	// Threshold is the threshold that was applied.
	Threshold float64
	// Max is the largest severity measured (so "not reached up to Max").
	Max float64
	// Min is the smallest severity measured. A break at Min means the
	// retention was already below Threshold there: in a context with
	// other stress applied, that context alone broke the policy.
	Min float64
	// FirstDip is the smallest severity whose point estimate alone is
	// below Threshold (NaN when none): a secondary figure that follows
	// the noise of the curve. Set by BreakingPoint only.
	FirstDip float64
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

// DipString returns the first-dip severity or "none".
func (b Break) DipString() string {
	if math.IsNaN(b.FirstDip) {
		return "none"
	}
	return strconv.FormatFloat(b.FirstDip, 'g', 4, 64)
}

// BreakingPoint returns the smallest severity in levels whose whole
// retention interval lies below threshold (Retention.Hi < threshold):
// the first severity at which the data show, at the interval's level,
// that the policy keeps less than threshold of its (normalised) clean
// score. A noisy curve whose point estimates wander about the threshold
// does not break until an interval clears it. The first severity whose
// point estimate dips below is kept as Break.FirstDip. threshold 0 means
// DefaultBreakThreshold. levels need not be sorted; it is not modified.
// If no interval lies below, the Break is not Reached.
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
	br := Break{Severity: math.NaN(), FirstDip: math.NaN(), Threshold: threshold, Max: ls[len(ls)-1].Severity, Min: ls[0].Severity}
	for _, l := range ls {
		if math.IsNaN(br.FirstDip) && l.Retention.Value < threshold {
			br.FirstDip = l.Severity
		}
		if !br.Reached && l.Retention.Hi < threshold {
			br.Reached, br.Severity = true, l.Severity
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
	// Scores are the candidate's normalised episode scores by stratum
	// (condition). All candidates must be paired: the same strata, and in
	// stratum k the same seeds in the same order (see Arms).
	Scores Strata
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
	Bootstrap Bootstrap
	// Statistic scores a candidate; zero value StatIQM.
	Statistic Statistic
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
	Score []Estimate
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
	if _, _, err := r.Bootstrap.params(); err != nil {
		return Choice{}, fmt.Errorf("recommend: %w", err)
	}
	n := len(cands)
	ch := Choice{Pick: -1, Best: -1, Score: make([]Estimate, n), Versus: make([]Comparison, n),
		Affordable: make([]bool, n), Qualifies: make([]bool, n), More: -1}
	all := make(Arms, n)
	for i, c := range cands {
		if math.IsNaN(c.Cost) || c.Cost < 0 {
			return Choice{}, fmt.Errorf("recommend: candidate %q cost %v is not a non-negative number", c.Name, c.Cost)
		}
		all[i] = c.Scores
	}
	if err := all.check("recommend"); err != nil {
		return Choice{}, err
	}
	for i, c := range cands {
		bs := r.Bootstrap
		bs.Seed = seeds.DeriveSeed(r.Bootstrap.Seed, uint64(i), seeds.StreamKey("score"))
		rep, lv, err := bs.single(c.Scores, r.Statistic)
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
	var arms Arms
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
// MinPercentileN scores per stratum.
func (b Bootstrap) single(s Strata, st Statistic) (*Replicates, float64, error) {
	rep, _, lv, err := b.paired("score", Arms{s}, st, func(v []float64) float64 { return v[0] })
	return rep, lv, err
}
