package analysis

import (
	"errors"
	"fmt"
	"strconv"
	"strings"

	"tilebench/internal/seeds"
	"tilebench/vision/report"
	"tilebench/vision/stats"
	"tilebench/vision/study"
)

// PolicyDiff compares two policies of a study in one condition, on the
// seeds both played (every policy plays the same seeds, study.Plan).
// Differences are A − B.
type PolicyDiff struct {
	// A and B are the policies' labels, CellA and CellB their cells.
	A, B         string
	CellA, CellB int
	// Condition is what is done to the input (Cell.Condition), Label its
	// description with the patch size.
	Condition study.Cell
	Label     string
	// Score is the paired comparison of the normalised scores on the
	// common scale (Analysis.CompareScale): A − B with its interval,
	// the unpaired width and the signed-rank test; nil when undefined.
	Score *stats.PairedComparison
	// Retention is retention(A) − retention(B), each policy's score
	// against its own clean score over the shared floor, all resampled
	// together (stats.Bootstrap.NormalizedDiff); nil for the clean cell
	// itself or when undefined.
	Retention *stats.Estimate
	// Note says why a statistic is missing.
	Note string
}

// Robustness is the verdict on one stress axis for a pair of policies:
// which one keeps more of its clean score, and the evidence.
type Robustness struct {
	// A and B are the labels compared; Axis and Context as in AxisCurve
	// (the context without the policy).
	A, B, Axis, Context string
	// More is the label of the policy shown more robust ("" when neither
	// is, or when the evidence points both ways: Mixed).
	More  string
	Mixed bool
	// Undefined is true when no retention difference could be computed
	// (a clean score at or below the floor); Statement says why.
	Undefined bool
	// Statement is the plain sentence; Evidence lists, per severity, the
	// interval of retention(A) − retention(B) and whether it excludes 0.
	Statement string
	Evidence  []string
}

// comparePolicies fills Diffs and Verdicts for every pair of the study's
// policies (in the order given: the first against each later one).
func (a *Analysis) comparePolicies() {
	d := a.Plan.Def
	if !d.Compares() {
		return
	}
	fl, ref, scale, scaleOK := a.commonScale("policy")
	a.CompareScale = scale
	norm := func(x []float64) []float64 {
		out := make([]float64, len(x))
		for i, v := range x {
			out[i] = (v - fl) / (ref - fl)
		}
		return out
	}
	floor := a.floorOf(d.Variation)
	byID := map[string]int{}
	for i, c := range a.Plan.Cells {
		byID[c.ID()] = i
	}
	labels := make([]string, 0, len(d.Policies))
	for _, l := range d.Policies {
		labels = append(labels, l.Label)
	}
	for ia, la := range labels {
		for _, lb := range labels[ia+1:] {
			for i, c := range a.Plan.Cells {
				if c.Policy != la {
					continue
				}
				cb := c
				cb.Policy = lb
				j, ok := byID[cb.ID()]
				if !ok {
					continue
				}
				pd := PolicyDiff{A: la, B: lb, CellA: i, CellB: j, Condition: c.Condition(), Label: conditionLabel(c, d.Variation)}
				bs := stats.Bootstrap{Resamples: d.Stats.Resamples, Level: d.Stats.Confidence,
					Seed: seeds.DeriveSeed(d.Seed, seeds.StreamKey("policy-diff"), seeds.StreamKey(c.Key()))}
				col := align(a.Cells[i].ByEpisode, a.Cells[j].ByEpisode)
				switch {
				case !scaleOK:
					pd.Note = "no common scale: " + scale
				case len(col[0]) < 2:
					pd.Note = "fewer than 2 seeds played by both policies"
				default:
					if pc, err := bs.Compare(stats.Strata{norm(col[0])}, stats.Strata{norm(col[1])}, stats.StatIQM); err == nil {
						pd.Score = &pc
					} else {
						pd.Note = err.Error()
					}
				}
				ra, rb := a.Plan.Reference(i), a.Plan.Reference(j)
				if ra >= 0 && rb >= 0 && ra != i {
					cols := align(a.Cells[i].ByEpisode, a.Cells[ra].ByEpisode, a.Cells[j].ByEpisode, a.Cells[rb].ByEpisode, floor)
					if len(cols[0]) >= 2 {
						var fs stats.Strata
						if floor != nil {
							fs = stats.Strata{cols[4]}
						}
						e, err := bs.NormalizedDiff(stats.Strata{cols[0]}, stats.Strata{cols[1]}, stats.Strata{cols[2]}, stats.Strata{cols[3]}, fs, stats.StatIQM)
						switch {
						case errors.Is(err, stats.ErrNoSpan):
							fv := 0.0
							if fs != nil {
								fv = stats.IQM(cols[4])
							}
							who := la
							if stats.IQM(cols[1]) > fv {
								who = lb
							}
							pd.Note = joinNote(pd.Note, fmt.Sprintf("retention difference undefined: the clean IQM of %s does not exceed the floor's %s", who, fmtG(fv)))
						case err != nil:
							pd.Note = joinNote(pd.Note, "retention difference undefined: "+err.Error())
						default:
							pd.Retention = &e
						}
					}
				}
				a.Diffs = append(a.Diffs, pd)
			}
			a.robustness(la, lb)
		}
	}
}

// robustness states, for every pure axis curve of policy la that policy
// lb also has, which of the two keeps more of its clean score: policy X
// is shown more robust when the interval of retention(X) − retention(other)
// lies wholly above 0 at one severity or more and wholly below 0 at none.
func (a *Analysis) robustness(la, lb string) {
	diff := map[int]*PolicyDiff{}
	for k := range a.Diffs {
		if pd := &a.Diffs[k]; pd.A == la && pd.B == lb {
			diff[pd.CellA] = pd
		}
	}
	for _, cv := range a.Curves {
		if cv.Policy != la || !cv.Pure {
			continue
		}
		ctx := strings.TrimPrefix(cv.Context, "policy "+la+", ")
		r := Robustness{A: la, B: lb, Axis: cv.Axis, Context: ctx}
		var above, below, none []string
		why := ""
		for k, ci := range cv.Cells {
			pd := diff[ci]
			if pd == nil || pd.Retention == nil {
				if pd != nil && pd.Note != "" && pd.CellA != a.Plan.Reference(pd.CellA) && why == "" {
					why = pd.Note
				}
				continue
			}
			e := *pd.Retention
			sev := fmtG(cv.Severities[k])
			switch {
			case e.Lo > 0:
				above = append(above, sev)
				r.Evidence = append(r.Evidence, fmt.Sprintf("%s: %s, excludes 0", sev, e))
			case e.Hi < 0:
				below = append(below, sev)
				r.Evidence = append(r.Evidence, fmt.Sprintf("%s: %s, excludes 0", sev, e))
			default:
				none = append(none, sev)
				r.Evidence = append(r.Evidence, fmt.Sprintf("%s: %s, includes 0", sev, e))
			}
		}
		on := cv.Axis + " (" + ctx + ")"
		if len(r.Evidence) == 0 {
			if why == "" {
				continue
			}
			r.Statement = fmt.Sprintf("On %s the robustness of %s and %s cannot be compared: %s.", on, la, lb, why)
			r.Evidence = []string{why}
			r.Undefined = true
			a.Verdicts = append(a.Verdicts, r)
			continue
		}
		switch {
		case len(above) > 0 && len(below) > 0:
			r.Mixed = true
			r.Statement = fmt.Sprintf("On %s neither policy is more robust throughout: %s keeps more of its clean score at %s, %s at %s.", on, la, strings.Join(above, ", "), lb, strings.Join(below, ", "))
		case len(above) > 0:
			r.More = la
			r.Statement = fmt.Sprintf("On %s, %s is more robust than %s: it keeps more of its clean score at %s (the interval of retention %s − %s lies above 0)%s.", on, la, lb, strings.Join(above, ", "), la, lb, restNote(none))
		case len(below) > 0:
			r.More = lb
			r.Statement = fmt.Sprintf("On %s, %s is more robust than %s: it keeps more of its clean score at %s (the interval of retention %s − %s lies below 0)%s.", on, lb, la, strings.Join(below, ", "), la, lb, restNote(none))
		default:
			r.Statement = fmt.Sprintf("On %s no difference in robustness between %s and %s is shown: every interval of retention %s − %s includes 0.", on, la, lb, la, lb)
		}
		if w := unstable(a, cv.Cells, diff); w != "" {
			r.Statement += " Read with care: " + w + "."
		}
		a.Verdicts = append(a.Verdicts, r)
	}
}

// unstable names the policies of a curve's comparison whose retention is
// a ratio over a clean score near the floor (CellStats.Warn).
func unstable(a *Analysis, cells []int, diff map[int]*PolicyDiff) string {
	var who []string
	seen := map[string]bool{}
	for _, ci := range cells {
		pd := diff[ci]
		if pd == nil {
			continue
		}
		for _, c := range []int{pd.CellA, pd.CellB} {
			if l := a.Plan.Cells[c].Policy; a.Cells[c].Warn != "" && !seen[l] {
				seen[l] = true
				who = append(who, l)
			}
		}
	}
	if len(who) == 0 {
		return ""
	}
	return "the clean score of " + strings.Join(who, " and ") + " comes near the floor, so its retention is an unstable ratio; compare the normalised scores instead"
}

func restNote(none []string) string {
	if len(none) == 0 {
		return ""
	}
	return "; no difference is shown at " + strings.Join(none, ", ")
}

// conditionLabel describes a condition with its patch size.
func conditionLabel(c study.Cell, base string) string {
	s := fmt.Sprintf("patch %d, %s", c.Patch, c.Label())
	if c.Variation != base {
		s += ", variation " + variationName(c.Variation)
	}
	return s
}

// comparisonSection adds the policies side by side, their paired
// differences per condition and the robustness verdicts.
func (a *Analysis) comparisonSection(rd *report.Data) {
	d := a.Plan.Def
	if !d.Compares() {
		return
	}
	for _, r := range a.Verdicts {
		rd.Findings = append(rd.Findings, report.KV{Key: fmt.Sprintf("robustness, %s vs %s: %s (%s)", r.A, r.B, r.Axis, r.Context), Value: r.Statement})
	}
	// Side by side.
	labels := make([]string, len(d.Policies))
	cols := []string{"condition"}
	for i, l := range d.Policies {
		labels[i] = l.Label
		cols = append(cols, l.Label+" IQM [CI]", l.Label+" retention [CI]")
	}
	st := report.Table{ID: "policies", Title: "Policies side by side", Nav: "Policies",
		Caption: "Every policy plays the same game seeds and pipeline seeds in every condition. Retention is each policy's normalised retention against its own clean cell; " +
			"the breaking points of each policy are in the headline, one row per policy and axis.",
		Columns: cols}
	byID := map[string]int{}
	for i, c := range a.Plan.Cells {
		byID[c.ID()] = i
	}
	for _, c := range a.Plan.Cells {
		if c.Policy != labels[0] {
			continue
		}
		row := []string{conditionLabel(c, d.Variation)}
		for _, l := range labels {
			cl := c
			cl.Policy = l
			i, ok := byID[cl.ID()]
			if !ok || a.Cells[i].Summary == nil {
				row = append(row, "—", "—")
				continue
			}
			ret := "—"
			if a.Plan.Reference(i) == i {
				ret = "1 (reference)"
			} else if r := a.Cells[i].Retention; r != nil {
				ret = r.String()
			}
			row = append(row, a.Cells[i].Summary.IQM.String(), ret)
		}
		st.Rows = append(st.Rows, row)
	}
	rd.Tables = append(rd.Tables, st)

	dt := report.Table{ID: "policy-diffs", Title: "Paired differences between policies", Nav: "Policy differences",
		Caption: "Per condition, A − B on the seeds both played, each drawn seed bringing both policies' episodes (paired bootstrap, BCa below " + strconv.Itoa(stats.MinPercentileN) + " seeds). " +
			"The score difference is on one scale for both policies, " + a.CompareScale + ". Retention difference: each policy against its own clean score over the same floor, all resampled together. " +
			"Signed-rank: Wilcoxon's test of the per-seed differences of normalised scores (two-sided). Intervals are per condition, not adjusted for the number of conditions.",
		Columns: []string{"condition", "A − B", "seeds", "normalised score A − B [CI], paired", "paired width", "unpaired width", "signed-rank p", "retention A − B [CI]", "interval excludes 0", "note"}}
	for _, pd := range a.Diffs {
		row := []string{pd.Label, pd.A + " − " + pd.B}
		if pc := pd.Score; pc != nil {
			row = append(row, strconv.Itoa(pc.Seeds), pc.Diff.String(), fmtG(pc.Diff.Hi-pc.Diff.Lo), fmtG(pc.Unpaired.Hi-pc.Unpaired.Lo), fmtP(pc.Test.P))
		} else {
			row = append(row, "—", "—", "—", "—", "—")
		}
		ret, excl := "—", excludes(pd.Score, nil)
		if pd.Retention != nil {
			ret = pd.Retention.String()
			excl = excludes(pd.Score, pd.Retention)
		}
		row = append(row, ret, excl, pd.Note)
		dt.Rows = append(dt.Rows, row)
	}
	if len(dt.Rows) == 0 {
		dt.Rows = append(dt.Rows, []string{"—", "—", "—", "—", "—", "—", "—", "—", "—", "no condition was played by two policies"})
	}
	rd.Tables = append(rd.Tables, dt)

	vt := report.Table{ID: "robustness", Title: "Which policy is more robust, axis by axis", Nav: "Robustness",
		Caption: "A policy is shown more robust on an axis when the interval of its retention minus the other's lies wholly above 0 at one severity or more and wholly below 0 at none. " +
			"An interval that includes 0 shows no difference; it does not show the policies equal.",
		Columns: []string{"A − B", "axis", "context", "more robust", "evidence (severity: retention A − B [CI])"}}
	for _, r := range a.Verdicts {
		more := r.More
		switch {
		case r.Mixed:
			more = "mixed"
		case r.Undefined:
			more = "not comparable"
		case more == "":
			more = "no difference shown"
		}
		vt.Rows = append(vt.Rows, []string{r.A + " − " + r.B, r.Axis, r.Context, more, strings.Join(r.Evidence, "; ")})
	}
	if len(vt.Rows) == 0 {
		vt.Rows = append(vt.Rows, []string{"—", "—", "—", "—", "the study sweeps no stress axis on its own (only clean cells, or only combinations)"})
	}
	rd.Tables = append(rd.Tables, vt)
}

// excludes says which intervals exclude 0: the normalised score's and the
// retention difference's.
func excludes(score *stats.PairedComparison, ret *stats.Estimate) string {
	var parts []string
	if score != nil {
		parts = append(parts, "score: "+yesNo(score.Diff.Lo > 0 || score.Diff.Hi < 0))
	}
	if ret != nil {
		parts = append(parts, "retention: "+yesNo(ret.Lo > 0 || ret.Hi < 0))
	}
	if len(parts) == 0 {
		return "—"
	}
	return strings.Join(parts, ", ")
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

// Interval is an estimate with its interval, for machine-readable output.
type Interval struct {
	Value float64 `json:"value"`
	Lo    float64 `json:"lo"`
	Hi    float64 `json:"hi"`
	// ExcludesZero is true when the interval lies wholly above or below 0.
	ExcludesZero bool `json:"excludes_zero"`
}

func intervalOf(e stats.Estimate) *Interval {
	return &Interval{Value: e.Value, Lo: e.Lo, Hi: e.Hi, ExcludesZero: e.Lo > 0 || e.Hi < 0}
}

// DiffJSON is one PolicyDiff in the --json summary.
type DiffJSON struct {
	A         string    `json:"a"`
	B         string    `json:"b"`
	Condition string    `json:"condition"`
	Seeds     int       `json:"seeds"`
	Score     *Interval `json:"score_diff,omitempty"`
	SignedP   *float64  `json:"signed_rank_p,omitempty"`
	Retention *Interval `json:"retention_diff,omitempty"`
	Note      string    `json:"note,omitempty"`
}

// VerdictJSON is one Robustness in the --json summary.
type VerdictJSON struct {
	A         string   `json:"a"`
	B         string   `json:"b"`
	Axis      string   `json:"axis"`
	Context   string   `json:"context"`
	More      string   `json:"more_robust"`
	Mixed     bool     `json:"mixed,omitempty"`
	Undefined bool     `json:"undefined,omitempty"`
	Statement string   `json:"statement"`
	Evidence  []string `json:"evidence"`
}

// ComparisonJSON is the policy comparison of a study for the --json
// summary (nil for a study of one policy).
type ComparisonJSON struct {
	Scale    string        `json:"scale"`
	Diffs    []DiffJSON    `json:"diffs"`
	Verdicts []VerdictJSON `json:"verdicts"`
}

// Comparison returns the policy comparison in machine-readable form.
func (a *Analysis) Comparison() *ComparisonJSON {
	if !a.Plan.Def.Compares() {
		return nil
	}
	out := &ComparisonJSON{Scale: a.CompareScale, Diffs: []DiffJSON{}, Verdicts: []VerdictJSON{}}
	for _, pd := range a.Diffs {
		dj := DiffJSON{A: pd.A, B: pd.B, Condition: pd.Label, Note: pd.Note}
		if pd.Score != nil {
			dj.Seeds = pd.Score.Seeds
			dj.Score = intervalOf(pd.Score.Diff)
			p := pd.Score.Test.P
			dj.SignedP = &p
		}
		if pd.Retention != nil {
			dj.Retention = intervalOf(*pd.Retention)
		}
		out.Diffs = append(out.Diffs, dj)
	}
	for _, r := range a.Verdicts {
		out.Verdicts = append(out.Verdicts, VerdictJSON(r))
	}
	return out
}
