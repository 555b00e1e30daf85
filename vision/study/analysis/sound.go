package analysis

import (
	"errors"
	"fmt"
	"math"
	"strconv"

	"tilebench/internal/seeds"
	"tilebench/vision/report"
	"tilebench/vision/stats"
	"tilebench/vision/stats/choose"
	"tilebench/vision/study"
)

var nan = math.NaN()

// floorOf is the floor policy's returns by episode on variation v, nil
// when none is recorded.
func (a *Analysis) floorOf(v string) []float64 {
	if a.Floors == nil {
		return nil
	}
	return byEpisode(a.Floors.Floors, v, a.Plan.Def.Episodes)
}

// expertOf is the scripted expert's returns by episode on variation v,
// nil when none is recorded or the study's policy is the expert itself.
func (a *Analysis) expertOf(v string) []float64 {
	if a.Floors == nil || a.Plan.Def.Policy.Source == "expert" {
		return nil
	}
	return byEpisode(a.Floors.Expert, v, a.Plan.Def.Episodes)
}

// align keeps the episodes every column recorded (nil columns are
// skipped) and returns them column by column: the seeds the columns
// share, in episode order, so that index i is one seed in all of them.
func align(cols ...[]float64) [][]float64 {
	out := make([][]float64, len(cols))
	if len(cols) == 0 || cols[0] == nil {
		return out
	}
	for e := range cols[0] {
		ok := true
		for _, c := range cols {
			if c != nil && (e >= len(c) || math.IsNaN(c[e])) {
				ok = false
			}
		}
		if !ok {
			continue
		}
		for k, c := range cols {
			if c != nil {
				out[k] = append(out[k], c[e])
			}
		}
	}
	return out
}

// FloorLabel describes the floor in use, for reports.
func (a *Analysis) FloorLabel() string {
	if a.Floors == nil {
		return "0 (no floor policy recorded: retention is the plain ratio)"
	}
	return fmt.Sprintf("%s policy on the same seeds", a.Floors.Floor)
}

// normalise computes every cell's normalised retention against its clean
// reference, its share of expert and its paired comparison with the
// clean cell.
func (a *Analysis) normalise() {
	p := a.Plan
	base := p.Def.Variation
	floor := a.floorOf(base)
	expert := a.expertOf(base)
	// The reference's span above the floor, once per reference.
	spanWarn := map[int]string{}
	for i := range a.Cells {
		cs := &a.Cells[i]
		ref := p.Reference(i)
		if cs.Summary == nil || ref < 0 || a.Cells[ref].Summary == nil {
			if cs.Summary != nil && ref < 0 {
				cs.Note = joinNote(cs.Note, "retention undefined: the study has no clean cell at this patch size")
			}
			continue
		}
		bs := a.boot(i, "retention")
		if expert != nil {
			col := align(cs.ByEpisode, expert, floor)
			if len(col[0]) >= 2 {
				var fl stats.Strata
				if floor != nil {
					fl = stats.Strata{col[2]}
				}
				if e, err := a.boot(i, "expert").Normalized(stats.Strata{col[0]}, stats.Strata{col[1]}, fl, stats.StatIQM); err == nil {
					cs.Expert = &e
				}
			}
		}
		if i == ref {
			// Against itself on the same seeds: exactly 1.
			cs.Retention = &stats.Estimate{Value: 1, Lo: 1, Hi: 1, Level: p.Def.Stats.Confidence}
			continue
		}
		rc := a.Cells[ref].ByEpisode
		col := align(cs.ByEpisode, rc, floor)
		if len(col[0]) < 2 {
			cs.Note = joinNote(cs.Note, "retention undefined: fewer than 2 seeds shared with the clean cell")
			continue
		}
		x, r := stats.Strata{col[0]}, stats.Strata{col[1]}
		var fl stats.Strata
		if floor != nil {
			fl = stats.Strata{col[2]}
		}
		e, err := bs.Normalized(x, r, fl, stats.StatIQM)
		switch {
		case errors.Is(err, stats.ErrNoSpan):
			fv := 0.0
			if fl != nil {
				fv = stats.IQM(fl[0])
			}
			cs.Note = joinNote(cs.Note, fmt.Sprintf("retention undefined: the clean IQM %s does not exceed the floor's %s", fmtG(stats.IQM(r[0])), fmtG(fv)))
		case err != nil:
			cs.Note = joinNote(cs.Note, "retention undefined: "+err.Error())
		default:
			cs.Retention = &e
		}
		if w, ok := spanWarn[ref]; ok {
			cs.Warn = w
		} else {
			var sp stats.Estimate
			var err error
			if fl != nil {
				sp, err = a.boot(ref, "span").PairedDiff(r, fl, stats.StatIQM)
			} else {
				sp, err = a.boot(ref, "span").CI(r, stats.StatIQM)
			}
			if err == nil && sp.Value > 0 && stats.NearZero(sp) {
				w = fmt.Sprintf("unstable ratio: the clean score's interval above the floor, %s, comes near zero", sp)
			}
			spanWarn[ref] = w
			cs.Warn = w
		}
		// The paired comparison with the clean cell.
		if pc, err := bs.Compare(r, x, stats.StatIQM); err == nil {
			cs.VsClean = &pc
		}
	}
}

func joinNote(a, b string) string {
	if a == "" {
		return b
	}
	if b == "" {
		return a
	}
	return a + "; " + b
}

// recommend is the non-inferiority recommendation of a sizes study: the
// candidates are the patch sizes, their scores in every condition (the
// clean cell and each stress cell, matched across patch sizes) put on
// the normalised scale (x − floor) / (reference − floor), with the
// scripted expert's clean IQM as the reference when it was recorded and
// the best patch size's clean IQM otherwise. The scale's ends are fixed
// numbers for every candidate alike: they set the margin's meaning and
// do not change which candidate is best or the sign of a difference.
func (a *Analysis) recommend() error {
	ps := a.Plan.Patches()
	cost := map[int]Cost{}
	for _, c := range a.Costs {
		cost[c.Patch] = c
	}
	cond := func(c study.Cell) string { c.Patch = 0; return c.Key() }
	var conds []string
	label := map[string]string{}
	seen := map[string]bool{}
	for _, c := range a.Plan.Cells {
		if k := cond(c); !seen[k] {
			seen[k] = true
			conds = append(conds, k)
			label[k] = c.Label()
			if c.Variation != a.Plan.Def.Variation {
				label[k] += ", variation " + variationName(c.Variation)
			}
		}
	}
	idx := map[[2]string]int{}
	for i, c := range a.Plan.Cells {
		idx[[2]string{strconv.Itoa(c.Patch), cond(c)}] = i
	}
	d := a.Plan.Def
	for _, p := range ps {
		if _, ok := cost[p]; !ok {
			a.RecNote = fmt.Sprintf("no recommendation: patch %d has no cost measured (%s)", p, CostsFile)
			return nil
		}
	}
	// The scale.
	fl, ref, scale, ok := a.commonScale("patch size")
	if !ok {
		a.RecNote = "no recommendation: " + scale
		return nil
	}
	a.Scale = scale
	norm := func(v float64) float64 { return (v - fl) / (ref - fl) }
	// Per condition, the seeds every patch size recorded.
	var cands []choose.Candidate
	for _, p := range ps {
		co := cost[p]
		c := choose.Candidate{Name: fmt.Sprintf("patch %d", p), Cost: co.MFLOP}
		if d.Budget.Microseconds > 0 {
			c.Cost = co.LatencyUS
		}
		cands = append(cands, c)
	}
	var condLabels []string
	for _, k := range conds {
		cols := make([][]float64, len(ps))
		for j, p := range ps {
			i, ok := idx[[2]string{strconv.Itoa(p), k}]
			if !ok {
				a.RecNote = "no recommendation: the conditions differ between patch sizes"
				return nil
			}
			cols[j] = a.Cells[i].ByEpisode
		}
		al := align(cols...)
		if len(al[0]) < 2 {
			a.Conds = append(a.Conds, CondTest{Label: label[k], Note: "fewer than 2 seeds recorded by every patch size"})
			continue
		}
		for j := range cands {
			z := make([]float64, len(al[j]))
			for e, v := range al[j] {
				z[e] = norm(v)
			}
			cands[j].Scores = append(cands[j].Scores, z)
		}
		condLabels = append(condLabels, label[k])
	}
	if len(condLabels) == 0 {
		a.RecNote = "no recommendation: no condition has 2 seeds recorded by every patch size"
		return nil
	}
	r := choose.Recommender{Bootstrap: stats.Bootstrap{Resamples: d.Stats.Resamples, Level: d.Stats.Confidence,
		Seed: seeds.DeriveSeed(d.Seed, seeds.StreamKey("recommend"))}, Margin: d.Stats.Margin}
	if d.Budget.Microseconds > 0 {
		r.Budget = d.Budget.Microseconds
	} else {
		r.Budget = d.Budget.MFLOP
	}
	ch, err := r.Recommend(cands)
	if err != nil {
		return fmt.Errorf("recommendation: %w", err)
	}
	a.Choice = &ch
	a.Cands = ps
	// Per condition: the same test on that condition's seeds alone.
	ni := choose.NonInferiority{Margin: d.Stats.Margin}
	for k, lab := range condLabels {
		ct := CondTest{Label: lab, Best: -1}
		var arms stats.Arms
		var pos []int
		for j, c := range cands {
			if !ch.Affordable[j] {
				continue
			}
			arms = append(arms, stats.Strata{c.Scores[k]})
			pos = append(pos, j)
		}
		ct.Score = make([]stats.Estimate, len(cands))
		ct.Versus = make([]choose.Comparison, len(cands))
		best := -1
		for j, c := range cands {
			bs := stats.Bootstrap{Resamples: d.Stats.Resamples, Level: d.Stats.Confidence,
				Seed: seeds.DeriveSeed(d.Seed, seeds.StreamKey("condition"), uint64(k), uint64(j))}
			e, err := bs.CI(stats.Strata{c.Scores[k]}, stats.StatIQM)
			if err != nil {
				continue
			}
			ct.Score[j] = e
		}
		for q, j := range pos {
			if best < 0 || ct.Score[j].Value > ct.Score[pos[best]].Value {
				best = q
			}
		}
		if best < 0 {
			ct.Note = "no affordable patch size"
			a.Conds = append(a.Conds, ct)
			continue
		}
		ni.Bootstrap = stats.Bootstrap{Resamples: d.Stats.Resamples, Seed: seeds.DeriveSeed(d.Seed, seeds.StreamKey("condition-ni"), uint64(k))}
		cmp, err := ni.Test(arms, best)
		if err != nil {
			ct.Note = err.Error()
			a.Conds = append(a.Conds, ct)
			continue
		}
		ct.Best = pos[best]
		for q, j := range pos {
			ct.Versus[j] = cmp[q]
		}
		a.Conds = append(a.Conds, ct)
	}
	return nil
}

// scaleSentence is " Scale." or nothing when there is no scale.
func scaleSentence(scale string) string {
	if scale == "" {
		return ""
	}
	return " " + scale + "."
}

// commonScale is the normalised scale whose ends are fixed numbers, the
// same for every arm compared: the floor policy's clean IQM (0 without
// one) and, as the reference, the scripted expert's clean IQM when it was
// recorded, else the best clean IQM among the study's clean cells
// (whose arms what names: "patch size", "policy"), all on the study's
// variation. desc describes the scale, or why there is none (ok false).
func (a *Analysis) commonScale(what string) (fl, ref float64, desc string, ok bool) {
	d := a.Plan.Def
	if f := a.floorOf(d.Variation); f != nil {
		if v := align(f)[0]; len(v) > 0 {
			fl = stats.IQM(v)
		}
	}
	ref, refName := nan, ""
	if ex := a.expertOf(d.Variation); ex != nil {
		if v := align(ex)[0]; len(v) > 0 {
			ref, refName = stats.IQM(v), "the scripted expert's clean IQM"
		}
	}
	if math.IsNaN(ref) {
		for i, c := range a.Plan.Cells {
			if c.Clean() && c.Variation == d.Variation && a.Cells[i].Summary != nil {
				if v := a.Cells[i].Summary.IQM.Value; math.IsNaN(ref) || v > ref {
					ref, refName = v, "the best "+what+"'s clean IQM"
				}
			}
		}
	}
	flName := "0 (no floor recorded)"
	if a.Floors != nil {
		flName = fmt.Sprintf("the %s policy's clean IQM", a.Floors.Floor)
	}
	if !(ref > fl) {
		return fl, ref, fmt.Sprintf("the reference score %s does not exceed the floor %s, so the normalised scale is undefined", fmtG(ref), fmtG(fl)), false
	}
	return fl, ref, fmt.Sprintf("normalised score (x − floor) / (reference − floor): floor %s = %s, reference %s = %s", flName, fmtG(fl), refName, fmtG(ref)), true
}

// soundTables adds the tables behind the headline: the normalisation,
// the paired comparisons with the clean cell and, for a sizes study, the
// evidence of the non-inferiority tests.
func (a *Analysis) soundTables(rd *report.Data) {
	d := a.Plan.Def
	lv := d.Stats.Confidence
	// The normalisation.
	nt := report.Table{ID: "scale", Title: "Normalised scale: floor and reference",
		Caption: "Normalised score = (x − floor) / (reference − floor) (Mnih et al. 2015): 0 is the floor policy, 1 the reference. " +
			"Retention takes the policy's own clean score as the reference, share of expert the scripted expert's. " +
			"The baselines play the clean game on the study's own seeds.",
		Columns: []string{"baseline", "variation", "episodes", "IQM [CI]", "mean", "note"}}
	vars := []string{d.Variation}
	seen := map[string]bool{d.Variation: true}
	for _, c := range a.Plan.Cells {
		if !seen[c.Variation] {
			seen[c.Variation] = true
			vars = append(vars, c.Variation)
		}
	}
	row := func(name, v string, col []float64, missing string) {
		if col == nil {
			nt.Rows = append(nt.Rows, []string{name, variationName(v), "0", "—", "—", missing})
			return
		}
		x := align(col)[0]
		if len(x) == 0 {
			nt.Rows = append(nt.Rows, []string{name, variationName(v), "0", "—", "—", "every baseline episode failed to play"})
			return
		}
		bs := stats.Bootstrap{Resamples: d.Stats.Resamples, Level: lv, Seed: seeds.DeriveSeed(d.Seed, seeds.StreamKey("baseline"), seeds.StreamKey(name+"|"+v))}
		e, err := bs.CI(stats.Strata{x}, stats.StatIQM)
		txt := "—"
		if err == nil {
			txt = e.String()
		}
		nt.Rows = append(nt.Rows, []string{name, variationName(v), strconv.Itoa(len(x)), txt, fmtG(stats.Mean(x)), ""})
	}
	for _, v := range vars {
		row("floor: "+a.Floor, v, a.floorOf(v), "not recorded: retention is the plain ratio IQM stressed / IQM clean (floor 0)")
	}
	switch {
	case d.Policy.Source == "expert":
		nt.Rows = append(nt.Rows, []string{"scripted expert", variationName(d.Variation), "—", "—", "—", "the study's policy is the expert: share of expert is its retention"})
	default:
		row("scripted expert", d.Variation, a.expertOf(d.Variation), "not recorded (the game ships no expert, or the baselines were not played)")
	}
	rd.Tables = append(rd.Tables, nt)

	// Paired comparisons with the clean cell.
	pt := report.Table{ID: "paired", Title: "Paired comparisons with the clean cell", Nav: "Pairing",
		Caption: "Every cell plays the same game seeds (common random numbers, Glasserman & Yao 1992), so a cell and its clean cell are compared seed by seed: " +
			"the interval of IQM(clean) − IQM(cell) resamples seeds, each drawn seed bringing both its episodes (paired bootstrap); the unpaired width, resampling the two cells independently, is shown beside it. " +
			"The test is Wilcoxon's signed-rank test of the per-seed differences (two-sided).",
		Columns: []string{"cell", "seeds shared", "IQM clean − cell [CI], paired", "paired width", "unpaired width", "signed-rank p", "note"}}
	for i, cs := range a.Cells {
		ref := a.Plan.Reference(i)
		if ref == i {
			continue
		}
		id := cellID(i, cs.Cell, d.Variation)
		pc := cs.VsClean
		if pc == nil {
			why := cs.Note
			if why == "" {
				why = "not compared"
			}
			if ref < 0 {
				why = "no clean cell at this patch size"
			}
			pt.Rows = append(pt.Rows, []string{id, "—", "—", "—", "—", "—", why})
			continue
		}
		method := "exact"
		if !pc.Test.Exact {
			method = "normal approx."
		}
		pt.Rows = append(pt.Rows, []string{id, strconv.Itoa(pc.Seeds), pc.Diff.String(), fmtG(pc.Diff.Hi - pc.Diff.Lo),
			fmtG(pc.Unpaired.Hi - pc.Unpaired.Lo), fmt.Sprintf("%s (%s)", fmtP(pc.Test.P), method), joinNote(cs.Note, cs.Warn)})
	}
	if len(pt.Rows) == 0 {
		pt.Rows = append(pt.Rows, []string{"—", "—", "—", "—", "—", "—", "the study has only clean cells"})
	}
	rd.Tables = append(rd.Tables, pt)

	if d.Kind != "sizes" {
		return
	}
	margin := d.Stats.Margin
	if margin == 0 {
		margin = choose.DefaultMargin
	}
	et := report.Table{ID: "evidence", Title: "Evidence for the recommendation", Nav: "Evidence",
		Caption: fmt.Sprintf("Non-inferiority (Schuirmann 1987): a patch size counts as good as the best when the upper bound of (normalised IQM of the best − its normalised IQM) lies below the margin δ = %s, "+
			"each comparison one-sided at the Holm-adjusted level (Holm 1979; family-wise α = %s), by the paired bootstrap over the seeds every size played (BCa below %d seeds). "+
			"The pooled rows decide the recommendation; the rows per condition show where a size falls short. "+
			"Episodes needed: per condition, for %.0f%% power by the normal approximation, taking the observed difference and spread as true.%s",
			fmtG(margin), fmtG(choose.DefaultAlpha), stats.MinPercentileN, 100*choose.DefaultPower, scaleSentence(a.Scale)),
		Columns: []string{"condition", "patch", "normalised IQM [CI]", "best − patch [CI]", "margin", "Holm-adjusted p", "verdict", "episodes needed"}}
	verdict := func(c choose.Comparison, isBest bool) (string, string) {
		switch {
		case isBest:
			return "best", "—"
		case c.NonInferior:
			return "non-inferior", "—"
		case c.Needed < 0:
			return "not shown: observed difference at or past the margin", "—"
		}
		return "not enough evidence", strconv.Itoa(c.Needed)
	}
	if ch := a.Choice; ch != nil {
		for j, p := range a.Cands {
			if !ch.Affordable[j] {
				et.Rows = append(et.Rows, []string{"pooled", strconv.Itoa(p), ch.Score[j].String(), "—", fmtG(margin), "—", "over budget", "—"})
				continue
			}
			v, n := verdict(ch.Versus[j], j == ch.Best)
			diff, padj := "—", "—"
			if j != ch.Best {
				diff, padj = ch.Versus[j].Diff.String(), fmtP(ch.Versus[j].PAdj)
			}
			et.Rows = append(et.Rows, []string{"pooled", strconv.Itoa(p), ch.Score[j].String(), diff, fmtG(margin), padj, v, n})
		}
		for _, ct := range a.Conds {
			if ct.Note != "" || ct.Best < 0 {
				et.Rows = append(et.Rows, []string{ct.Label, "—", "—", "—", fmtG(margin), "—", "not tested: " + ct.Note, "—"})
				continue
			}
			for j, p := range a.Cands {
				if !ch.Affordable[j] {
					continue
				}
				v, n := verdict(ct.Versus[j], j == ct.Best)
				diff, padj := "—", "—"
				if j != ct.Best {
					diff, padj = ct.Versus[j].Diff.String(), fmtP(ct.Versus[j].PAdj)
				}
				et.Rows = append(et.Rows, []string{ct.Label, strconv.Itoa(p), ct.Score[j].String(), diff, fmtG(margin), padj, v, n})
			}
		}
	} else {
		why := a.RecNote
		if why == "" {
			why = "no recommendation was computed"
		}
		et.Rows = append(et.Rows, []string{"pooled", "—", "—", "—", fmtG(margin), "—", why, "—"})
	}
	rd.Tables = append(rd.Tables, et)
}
