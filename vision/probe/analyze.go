package probe

import (
	"bytes"
	"cmp"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"image"
	"math"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/disintegration/imaging"
	"gonum.org/v1/gonum/stat/distuv"

	"tilebench/internal/atomicfile"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision/report"
	"tilebench/vision/stats"
	"tilebench/vision/stats/breakpoint"
	"tilebench/vision/study"
)

// Report file names (report.html comes from vision/report).
const (
	summaryFile = "summary.md"
	csvFile     = "cells.csv"
	jsonFile    = "summary.json"
)

// Rate is a share of frames with its Wilson interval (frames counted as
// independent trials) and its sequence-bootstrap interval.
type Rate struct {
	Value     float64 `json:"value"`
	WilsonLo  float64 `json:"wilson_lo"`
	WilsonHi  float64 `json:"wilson_hi"`
	BootLo    float64 `json:"boot_lo"`
	BootHi    float64 `json:"boot_hi"`
	Successes int     `json:"successes"`
	Trials    int     `json:"trials"`
}

// Interval is a point estimate with a sequence-bootstrap interval.
type Interval struct {
	Value float64 `json:"value"`
	Lo    float64 `json:"lo"`
	Hi    float64 `json:"hi"`
}

// CellStats are the statistics of one cell.
type CellStats struct {
	Cell   int        `json:"cell"`
	Params study.Cell `json:"params"`
	Label  string     `json:"label"`
	// Axis, Kind and Severity place the cell on a stress axis ("clean",
	// "combined" when several axes are off their identity; its severity
	// is then 0).
	Axis     string  `json:"axis"`
	Kind     string  `json:"kind"`
	Severity float64 `json:"severity"`
	// Sequences and Frames finished; Failed units.
	Sequences int `json:"sequences"`
	Frames    int `json:"frames"`
	Failed    int `json:"failed"`
	// Drift is the mean per-frame drift with its sequence-bootstrap
	// interval; P50, P90, P99 and Max its quantiles (numpy "linear").
	Drift Interval `json:"drift"`
	P50   float64  `json:"p50"`
	P90   float64  `json:"p90"`
	P99   float64  `json:"p99"`
	Max   float64  `json:"max"`
	// Held is the share of frames whose drift is at most the threshold
	// (discrete: whose choice did not change).
	Held Rate `json:"held"`
	// Channel is the mean |Δ| per action channel (continuous).
	Channel []float64 `json:"channel,omitempty"`
	// CleanError and Error are the mean error against the recorded
	// actions (continuous: L2; discrete: the share of frames that
	// disagree), ErrorChange the paired mean of Error − CleanError per
	// frame with its interval. Nil without recorded actions.
	CleanError  *Interval `json:"clean_error,omitempty"`
	Error       *Interval `json:"error,omitempty"`
	ErrorChange *Interval `json:"error_change,omitempty"`
	// Agreement is the share of frames whose transformed choice equals
	// the recorded one, CleanAgreement the same for the clean pass
	// (discrete actions with recorded actions only).
	Agreement      *Rate `json:"agreement,omitempty"`
	CleanAgreement *Rate `json:"clean_agreement,omitempty"`
}

// BreakStats is the breaking point of one axis.
type BreakStats struct {
	Axis      string  `json:"axis"`
	Kind      string  `json:"kind"`
	Patch     int     `json:"patch"`
	Reached   bool    `json:"reached"`
	Severity  float64 `json:"severity,omitempty"`
	Max       float64 `json:"max"`
	Threshold float64 `json:"threshold"`
}

// Summary is the statistics of a probe, summary.json and the --json
// output.
type Summary struct {
	Format int    `json:"format"`
	Probe  string `json:"probe"`
	// Title says what was probed: "NAME: POLICY on RECORDING", the
	// recording by its file name and a fresh policy as "untrained FAMILY".
	Title      string       `json:"title"`
	Name       string       `json:"name"`
	Policy     string       `json:"policy"`
	Input      string       `json:"input"`
	Width      int          `json:"width"`
	Height     int          `json:"height"`
	Action     ActionSpace  `json:"action"`
	Frames     int          `json:"frames"`
	Sequences  int          `json:"sequences"`
	Units      int          `json:"units"`
	Finished   int          `json:"finished"`
	Failed     int          `json:"failed"`
	Threshold  float64      `json:"threshold"`
	Confidence float64      `json:"confidence"`
	Resamples  int          `json:"resamples"`
	Method     string       `json:"method"`
	Cells      []CellStats  `json:"cells"`
	Breaks     []BreakStats `json:"breaks"`
	Caution    string       `json:"caution"`
}

// place puts a cell on its axis.
func place(c study.Cell) (axis, kind string, sev float64) {
	type ax struct {
		axis, kind string
		sev        float64
	}
	var on []ax
	if c.Occlude != "none" {
		k, v, _ := strings.Cut(c.Occlude, ":")
		s := 1.0
		if k != "mask" {
			s, _ = strconv.ParseFloat(v, 64)
		} else {
			k = c.Occlude
		}
		if c.Fill != "black" {
			k += " fill " + c.Fill
		}
		on = append(on, ax{"occlusion", k, s})
	}
	if c.Scramble != "none" {
		k, v, _ := strings.Cut(c.Scramble, ":")
		s := 1.0
		if v != "" {
			s, _ = strconv.ParseFloat(v, 64)
		}
		if c.Every > 0 {
			k += " every " + strconv.Itoa(c.Every)
		}
		on = append(on, ax{"scramble", k, s})
	}
	if c.NoiseTokens > 0 {
		on = append(on, ax{"noise tokens", "count", float64(c.NoiseTokens)})
	}
	if c.Brightness != 0 {
		on = append(on, ax{"brightness", "offset", c.Brightness})
	}
	if c.Contrast != 1 {
		on = append(on, ax{"contrast", "factor", c.Contrast})
	}
	if c.PixelNoise != 0 {
		on = append(on, ax{"pixel noise", "sigma", c.PixelNoise})
	}
	if c.Corrupt != "" && c.Corrupt != "none" {
		// One corruption KIND:VALUE is an axis of its kind; a chain
		// (a+b) or a severity spelling is combined.
		k, v, _ := strings.Cut(c.Corrupt, ":")
		if sev, err := strconv.ParseFloat(v, 64); err == nil && !strings.Contains(c.Corrupt, "+") {
			on = append(on, ax{"corruption", k, sev})
		} else {
			on = append(on, ax{"corruption", c.Corrupt, 1})
		}
	}
	switch len(on) {
	case 0:
		return "clean", "", 0
	case 1:
		return on[0].axis, on[0].kind, on[0].sev
	}
	return "combined", c.Label(), 0
}

// identity is the severity of the clean cell on an axis.
func identity(axis string) float64 {
	if axis == "contrast" {
		return 1
	}
	return 0
}

// planTitle names what p probes, as a study's title names its game and
// policy: "NAME: POLICY on RECORDING", with a fresh policy as "untrained
// FAMILY" and the recording by its file (or folder) name.
func planTitle(p *Plan) string {
	pol := p.Config.Policy
	if pol == "fresh" {
		pol = "untrained " + p.Config.Family
	}
	return p.Config.Name + ": " + pol + " on " + filepath.Base(p.Input.Name)
}

// Analyze computes the statistics of the records of plan p.
func Analyze(p *Plan, recs []Record) (*Summary, error) {
	cfg := p.Config
	s := &Summary{Format: 1, Probe: p.Fingerprint, Title: planTitle(p), Name: cfg.Name, Policy: cfg.Policy, Input: p.Input.Name,
		Width: p.Width, Height: p.Height, Action: p.Space, Frames: p.Input.Frames, Sequences: len(p.Sequences),
		Units: p.Units(), Threshold: cfg.Threshold, Confidence: cfg.Confidence, Resamples: cfg.Resamples,
		Caution: report.Caution}
	if len(p.Sequences) >= stats.MinWholeSequences {
		s.Method = stats.MethodWholeSequence
	} else {
		s.Method = stats.MethodMovingBlock
	}
	z := distuv.UnitNormal.Quantile(0.5 + cfg.Confidence/2)
	by := make([][]Record, len(p.Cells))
	for _, r := range recs {
		if r.Cell < 0 || r.Cell >= len(p.Cells) {
			return nil, fmt.Errorf("record for cell %d: the probe has cells 0..%d", r.Cell, len(p.Cells)-1)
		}
		by[r.Cell] = append(by[r.Cell], r)
	}
	disc := p.Space.Discrete()
	for ci, c := range p.Cells {
		// A cell with no finished frames keeps zero statistics: read
		// Frames before them.
		cs := CellStats{Cell: ci, Params: c, Label: c.Label()}
		cs.Axis, cs.Kind, cs.Severity = place(c)
		var drift, cleanErr, errs, change, held stats.Sequences
		var channel []float64
		for _, r := range by[ci] {
			if r.Failed() {
				cs.Failed++
				continue
			}
			cs.Sequences++
			cs.Frames += r.Frames
			d := f64(r.Drift)
			drift = append(drift, d)
			h := make([]float64, len(d))
			for i, v := range d {
				if v <= cfg.Threshold && !(disc && v > 0) {
					h[i] = 1
				}
			}
			held = append(held, h)
			if channel == nil && len(r.Channel) > 0 {
				channel = make([]float64, len(r.Channel))
			}
			for i, v := range r.Channel {
				channel[i] += v * float64(r.Frames)
			}
			if len(r.Error) > 0 {
				ce, e := f64(r.CleanError), f64(r.Error)
				cleanErr, errs = append(cleanErr, ce), append(errs, e)
				dd := make([]float64, len(e))
				for i := range e {
					dd[i] = e[i] - ce[i]
				}
				change = append(change, dd)
			}
		}
		s.Finished += cs.Sequences
		s.Failed += cs.Failed
		if cs.Frames > 0 {
			for i := range channel {
				channel[i] /= float64(cs.Frames)
			}
			cs.Channel = channel
			b := stats.Bootstrap{Resamples: cfg.Resamples, Level: cfg.Confidence,
				Seed: patch.DeriveSeed(cfg.Seed, patch.StreamKey("probe-bootstrap"), uint64(ci))}
			var err error
			if cs.Drift, err = seqInterval(b, drift); err != nil {
				return nil, fmt.Errorf("cell %d: %w", ci, err)
			}
			var all []float64
			for _, x := range drift {
				all = append(all, x...)
			}
			slices.Sort(all)
			cs.P50, cs.P90, cs.P99, cs.Max = stats.Percentile(all, 50), stats.Percentile(all, 90), stats.Percentile(all, 99), all[len(all)-1]
			if cs.Held, err = rate(b, held, z); err != nil {
				return nil, fmt.Errorf("cell %d: %w", ci, err)
			}
			if len(errs) > 0 {
				ce, err1 := seqInterval(b, cleanErr)
				e, err2 := seqInterval(b, errs)
				ch, err3 := seqInterval(b, change)
				if err := cmp.Or(err1, err2, err3); err != nil {
					return nil, fmt.Errorf("cell %d: %w", ci, err)
				}
				cs.CleanError, cs.Error, cs.ErrorChange = &ce, &e, &ch
				if disc {
					ag, err1 := rate(b, flip(errs), z)
					cag, err2 := rate(b, flip(cleanErr), z)
					if err := cmp.Or(err1, err2); err != nil {
						return nil, fmt.Errorf("cell %d: %w", ci, err)
					}
					cs.Agreement, cs.CleanAgreement = &ag, &cag
				}
			}
		}
		s.Cells = append(s.Cells, cs)
	}
	s.Breaks = breaks(p, s)
	return s, nil
}

func f64(x []float32) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = float64(v)
	}
	return out
}

// flip turns per-frame disagreement (1) into agreement (1).
func flip(s stats.Sequences) stats.Sequences {
	out := make(stats.Sequences, len(s))
	for k, x := range s {
		y := make([]float64, len(x))
		for i, v := range x {
			y[i] = 1 - v
		}
		out[k] = y
	}
	return out
}

func seqInterval(b stats.Bootstrap, s stats.Sequences) (Interval, error) {
	e, _, err := b.SequenceMean(s)
	if err != nil {
		return Interval{}, err
	}
	return Interval{Value: e.Value, Lo: e.Lo, Hi: e.Hi}, nil
}

// rate is the share of ones in s with its Wilson and bootstrap intervals.
func rate(b stats.Bootstrap, s stats.Sequences, z float64) (Rate, error) {
	k, n := 0, 0
	for _, x := range s {
		for _, v := range x {
			if v == 1 {
				k++
			}
		}
		n += len(x)
	}
	e, _, err := b.SequenceMean(s)
	if err != nil {
		return Rate{}, err
	}
	lo, hi := stats.Wilson(k, n, z)
	return Rate{Value: e.Value, WilsonLo: lo, WilsonHi: hi, BootLo: e.Lo, BootHi: e.Hi, Successes: k, Trials: n}, nil
}

type seriesKey struct {
	patch      int
	axis, kind string
}

// series groups the single-axis cells by patch, axis and kind, each
// with the clean cell of its patch at the axis's identity.
func series(p *Plan, s *Summary) (keys []seriesKey, levels map[seriesKey][]int) {
	levels = map[seriesKey][]int{}
	clean := map[int]int{}
	for i, c := range s.Cells {
		if c.Axis == "clean" {
			clean[c.Params.Patch] = i
		}
	}
	for i, c := range s.Cells {
		if c.Axis == "clean" || c.Axis == "combined" || c.Frames == 0 {
			continue
		}
		k := seriesKey{c.Params.Patch, c.Axis, c.Kind}
		if _, ok := levels[k]; !ok {
			keys = append(keys, k)
			if ci, ok := clean[k.patch]; ok && s.Cells[ci].Frames > 0 {
				levels[k] = append(levels[k], ci)
			}
		}
		levels[k] = append(levels[k], i)
	}
	return keys, levels
}

func breaks(p *Plan, s *Summary) []BreakStats {
	keys, levels := series(p, s)
	var out []BreakStats
	for _, k := range keys {
		var ls []breakpoint.DriftLevel
		for _, ci := range levels[k] {
			c := s.Cells[ci]
			sev := c.Severity
			if c.Axis == "clean" {
				sev = identity(k.axis)
			}
			if k.axis == "brightness" {
				sev = math.Abs(sev)
			}
			ls = append(ls, breakpoint.DriftLevel{Severity: sev, Drift: stats.Estimate{Value: c.Drift.Value, Lo: c.Drift.Lo, Hi: c.Drift.Hi}})
		}
		br, err := breakpoint.DriftBreak(ls, s.Threshold)
		if err != nil {
			continue
		}
		b := BreakStats{Axis: k.axis, Kind: k.kind, Patch: k.patch, Reached: br.Reached, Max: br.Max, Threshold: br.Threshold}
		if br.Reached {
			b.Severity = br.Severity
		}
		out = append(out, b)
	}
	return out
}

// writeProbeReport analyses the results in dir and writes summary.json,
// summary.md, cells.csv and report.html there. src is the recording, for
// the strips of most-moved frames; nil leaves them out.
func writeProbeReport(dir string, src frameio.Random) error {
	in, err := ReadInfo(dir)
	if err != nil {
		return err
	}
	p := &in.Plan
	all, _, err := ReadResults(dir)
	if err != nil {
		return err
	}
	recs := sorted(latest(all))
	s, err := Analyze(p, recs)
	if err != nil {
		return err
	}
	js, err := json.MarshalIndent(s, "", " ")
	if err != nil {
		return fmt.Errorf("summary.json: %w", err)
	}
	if err := atomicfile.WriteBytes(filepath.Join(dir, jsonFile), append(js, '\n')); err != nil {
		return err
	}
	if err := atomicfile.WriteBytes(filepath.Join(dir, csvFile), cellsCSV(s)); err != nil {
		return err
	}
	if err := atomicfile.WriteBytes(filepath.Join(dir, summaryFile), summaryMarkdown(s, in.Command)); err != nil {
		return err
	}
	d := reportData(p, s, recs, src, in.Command)
	page, err := report.HTML(d)
	if err != nil {
		return err
	}
	return atomicfile.WriteBytes(filepath.Join(dir, report.HTMLFile), page)
}

// CSVColumns are the columns of cells.csv (docs/probe.md).
var CSVColumns = []string{"format", "cell", "label", "patch", "axis", "kind", "severity", "sequences", "frames", "failed",
	"drift_mean", "drift_lo", "drift_hi", "drift_p50", "drift_p90", "drift_p99", "drift_max",
	"held", "held_wilson_lo", "held_wilson_hi", "held_boot_lo", "held_boot_hi",
	"clean_error", "error", "error_change", "error_change_lo", "error_change_hi",
	"agreement", "agreement_lo", "agreement_hi", "clean_agreement", "channel_mean_abs"}

func ff(v float64) string {
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', 6, 64)
}

// cellsCSV returns cells.csv: one row per cell.
func cellsCSV(s *Summary) []byte {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.Write(CSVColumns)
	for _, c := range s.Cells {
		ce, e, ch, clo, chi := math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()
		if c.Error != nil {
			ce, e, ch, clo, chi = c.CleanError.Value, c.Error.Value, c.ErrorChange.Value, c.ErrorChange.Lo, c.ErrorChange.Hi
		}
		ag, alo, ahi, cag := math.NaN(), math.NaN(), math.NaN(), math.NaN()
		if c.Agreement != nil {
			ag, alo, ahi, cag = c.Agreement.Value, c.Agreement.WilsonLo, c.Agreement.WilsonHi, c.CleanAgreement.Value
		}
		var chs []string
		for _, v := range c.Channel {
			chs = append(chs, ff(v))
		}
		held := c.Held
		hv, hwl, hwh, hbl, hbh := math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()
		if held.Trials > 0 {
			hv, hwl, hwh, hbl, hbh = held.Value, held.WilsonLo, held.WilsonHi, held.BootLo, held.BootHi
		}
		w.Write([]string{"1", strconv.Itoa(c.Cell), c.Label, strconv.Itoa(c.Params.Patch), c.Axis, c.Kind, ff(c.Severity),
			strconv.Itoa(c.Sequences), strconv.Itoa(c.Frames), strconv.Itoa(c.Failed),
			ff(c.Drift.Value), ff(c.Drift.Lo), ff(c.Drift.Hi), ff(c.P50), ff(c.P90), ff(c.P99), ff(c.Max),
			ff(hv), ff(hwl), ff(hwh), ff(hbl), ff(hbh),
			ff(ce), ff(e), ff(ch), ff(clo), ff(chi), ff(ag), ff(alo), ff(ahi), ff(cag), strings.Join(chs, " ")})
	}
	w.Flush()
	return buf.Bytes()
}

func driftUnit(s *Summary) string {
	if s.Action.Kind == "discrete" {
		return "share of frames whose choice changed"
	}
	return "L2 norm of the action change"
}

func breakText(b BreakStats) string {
	if !b.Reached {
		return "not reached (≤ " + ff(b.Max) + ")"
	}
	return ff(b.Severity)
}

// summaryMarkdown returns summary.md.
func summaryMarkdown(s *Summary, command string) []byte {
	var b bytes.Buffer
	p := func(f string, a ...any) { fmt.Fprintf(&b, f, a...) }
	p("# %s\n\n", s.Title)
	p("Policy `%s` on `%s` (%d frames of %dx%d, %d sequences), %s actions of %d.\n\n", s.Policy, s.Input, s.Frames, s.Width, s.Height, s.Sequences, s.Action.Kind, s.Action.Dim)
	p("Drift: %s, per frame, transformed against clean. Intervals: %s, %d resamples, %.0f%% level. Threshold %s.\n\n", driftUnit(s), s.Method, s.Resamples, 100*s.Confidence, ff(s.Threshold))
	if s.Failed > 0 {
		p("**%d of %d units failed** and are left out; `--resume` retries them.\n\n", s.Failed, s.Units)
	}
	if len(s.Breaks) > 0 {
		p("## Where it breaks\n\nFirst severity whose drift interval lies wholly above %s.\n\n| axis | kind | patch | breaking point |\n|---|---|---:|---|\n", ff(s.Threshold))
		for _, br := range s.Breaks {
			p("| %s | %s | %d | %s |\n", br.Axis, br.Kind, br.Patch, breakText(br))
		}
		p("\n")
	}
	p("## Every cell\n\n| cell | condition | patch | frames | mean drift [CI] | p90 | p99 | held | error vs recorded (clean → transformed) |\n|---:|---|---:|---:|---|---:|---:|---:|---|\n")
	for _, c := range s.Cells {
		errText := ""
		if c.Error != nil {
			errText = ff(c.CleanError.Value) + " → " + ff(c.Error.Value)
		}
		p("| %d | %s | %d | %d | %s [%s, %s] | %s | %s | %s | %s |\n", c.Cell, c.Label, c.Params.Patch, c.Frames,
			ff(c.Drift.Value), ff(c.Drift.Lo), ff(c.Drift.Hi), ff(c.P90), ff(c.P99), ff(c.Held.Value), errText)
	}
	if command != "" {
		p("\n## Reproduce\n\n```\n%s\n```\n", command)
	}
	p("\n> **Caution.** %s\n", report.Caution)
	return b.Bytes()
}

// reportData fills the HTML report.
func reportData(p *Plan, s *Summary, recs []Record, src frameio.Random, command string) *report.Data {
	d := &report.Data{Title: s.Title, Kind: "probe", Units: "sequences",
		Run: report.Run{Command: command, Seed: p.Config.Seed, Episodes: s.Finished / max(1, len(p.Cells)), Failures: s.Failed,
			Params: []report.KV{{Key: "policy", Value: s.Policy}, {Key: "recording", Value: s.Input},
				{Key: "frames", Value: fmt.Sprintf("%d of %dx%d in %d sequences", s.Frames, s.Width, s.Height, s.Sequences)},
				{Key: "actions", Value: fmt.Sprintf("%s, %d values", s.Action.Kind, s.Action.Dim)},
				{Key: "intervals", Value: fmt.Sprintf("%s, %d resamples", s.Method, s.Resamples)}}},
		BreakRule: "Breaking point: the first measured severity whose whole drift interval lies above " + ff(s.Threshold) +
			" (" + driftUnit(s) + "). Not reached: the interval reached down to it at every severity measured."}
	for _, b := range s.Breaks {
		br := breakpoint.Break{Reached: b.Reached, Severity: math.NaN(), Threshold: b.Threshold, Max: b.Max}
		if b.Reached {
			br.Severity = b.Severity
		}
		d.Breaks = append(d.Breaks, report.Break{Axis: b.Axis + " " + b.Kind, Context: "patch " + strconv.Itoa(b.Patch), Break: br})
	}
	worst := -1
	for i, c := range s.Cells {
		if c.Axis != "clean" && c.Frames > 0 && (worst < 0 || c.Drift.Value > s.Cells[worst].Drift.Value) {
			worst = i
		}
	}
	if worst >= 0 {
		c := s.Cells[worst]
		d.Findings = append(d.Findings, report.KV{Key: "largest mean drift, under " + c.Label,
			Value: stats.Estimate{Value: c.Drift.Value, Lo: c.Drift.Lo, Hi: c.Drift.Hi}.String()})
		d.Findings = append(d.Findings, report.KV{Key: "frames whose action held there", Value: fmt.Sprintf("%.1f%% [%.1f, %.1f]", 100*c.Held.Value, 100*c.Held.WilsonLo, 100*c.Held.WilsonHi)})
	}
	for _, c := range s.Cells {
		if c.Axis == "clean" && c.CleanError != nil {
			d.Findings = append(d.Findings, report.KV{Key: "clean error vs recorded",
				Value: stats.Estimate{Value: c.CleanError.Value, Lo: c.CleanError.Lo, Hi: c.CleanError.Hi}.String()})
			break
		}
	}
	// Drift against severity, one chart per axis.
	keys, levels := series(p, s)
	byAxis := map[string]*report.Curves{}
	var order []string
	for _, k := range keys {
		if len(levels[k]) < 2 {
			continue
		}
		cv, ok := byAxis[k.axis]
		if !ok {
			// No Threshold on the chart: report.Curves draws it as a
			// retention floor ("first below"); drift breaks above it.
			cv = &report.Curves{Title: "Drift against " + k.axis + " (breaks above " + ff(s.Threshold) + ")", XLabel: k.axis + " severity", YLabel: "mean drift"}
			byAxis[k.axis] = cv
			order = append(order, k.axis)
		}
		sr := report.Series{Name: fmt.Sprintf("%s, patch %d", k.kind, k.patch)}
		for _, ci := range levels[k] {
			c := s.Cells[ci]
			x := c.Severity
			if c.Axis == "clean" {
				x = identity(k.axis)
			}
			sr.Points = append(sr.Points, report.CurvePoint{X: x, Y: c.Drift.Value, Lo: c.Drift.Lo, Hi: c.Drift.Hi})
		}
		cv.Series = append(cv.Series, sr)
	}
	for _, a := range order {
		d.Curves = append(d.Curves, *byAxis[a])
	}
	d.Heatmaps = heatmaps(s)
	d.Strips = strips(p, s, recs, src)
	d.Notes = append(d.Notes, "Drift is measured against the same policy on the clean frame, with the same policy seed; it says how far the action moved, not whether the moved action is worse. With recorded actions the error columns say that.")
	return d
}

// heatmaps are, per patch size, the share of frames whose action held:
// occlusion down, everything else across.
func heatmaps(s *Summary) []report.Heatmap {
	var out []report.Heatmap
	patches := map[int]bool{}
	var ps []int
	for _, c := range s.Cells {
		if !patches[c.Params.Patch] {
			patches[c.Params.Patch] = true
			ps = append(ps, c.Params.Patch)
		}
	}
	for _, pz := range ps {
		var ys, xs []string
		idx := map[[2]string]float64{}
		for _, c := range s.Cells {
			if c.Params.Patch != pz || c.Frames == 0 {
				continue
			}
			y := c.Params.Occlude
			rest := c.Params
			rest.Occlude = "none"
			x := rest.Label()
			if !slices.Contains(ys, y) {
				ys = append(ys, y)
			}
			if !slices.Contains(xs, x) {
				xs = append(xs, x)
			}
			idx[[2]string{y, x}] = c.Held.Value
		}
		if len(ys) < 2 && len(xs) < 2 {
			continue
		}
		h := report.Heatmap{Title: fmt.Sprintf("Share of frames whose action held (patch %d)", pz), XLabel: "other transforms", YLabel: "occlusion", X: xs, Y: ys}
		for _, y := range ys {
			row := make([]float64, len(xs))
			for j, x := range xs {
				v, ok := idx[[2]string{y, x}]
				if !ok {
					v = math.NaN()
				}
				row[j] = v
			}
			h.Z = append(h.Z, row)
		}
		out = append(out, h)
	}
	return out
}

// maxStrips and stripFrames bound the strips of most-moved frames.
const (
	maxStrips   = 6
	stripFrames = 4
)

// strips show, for the cells of largest mean drift, the frames whose
// action moved most, as the policy saw them, with both actions.
func strips(p *Plan, s *Summary, recs []Record, src frameio.Random) []report.Strip {
	if src == nil {
		return nil
	}
	var cells []int
	for i, c := range s.Cells {
		if c.Axis != "clean" && c.Frames > 0 && c.Drift.Value > 0 {
			cells = append(cells, i)
		}
	}
	sort.SliceStable(cells, func(a, b int) bool { return s.Cells[cells[a]].Drift.Value > s.Cells[cells[b]].Drift.Value })
	if len(cells) > maxStrips {
		cells = cells[:maxStrips]
	}
	type pick struct {
		rec *Record
		m   Moved
	}
	var out []report.Strip
	for _, ci := range cells {
		var picks []pick
		for i := range recs {
			if recs[i].Cell == ci && !recs[i].Failed() {
				for _, m := range recs[i].Top {
					picks = append(picks, pick{&recs[i], m})
				}
			}
		}
		sort.SliceStable(picks, func(a, b int) bool { return picks[a].m.Drift > picks[b].m.Drift })
		if len(picks) > stripFrames {
			picks = picks[:stripFrames]
		}
		c := p.Cells[ci]
		grid, err := p.grid(c.Patch)
		if err != nil {
			continue
		}
		pipe, err := patch.NewPipeline(grid, c.Spec())
		if err != nil {
			continue
		}
		st := report.Strip{Title: s.Cells[ci].Label + fmt.Sprintf(" (patch %d)", c.Patch),
			Caption: "The frames whose action moved most, as the policy saw them; under each: clean action → transformed action."}
		for _, pk := range picks {
			img, err := seenFrame(p, src, grid, pipe, pk.rec, pk.m.Frame)
			if err != nil {
				continue
			}
			st.Frames = append(st.Frames, report.Frame{Image: img,
				Label: fmt.Sprintf("frame %d: %s → %s", pk.rec.Start+pk.m.Frame, vec(pk.m.Clean), vec(pk.m.Moved))})
		}
		if len(st.Frames) > 0 {
			out = append(out, st)
		}
	}
	return out
}

func vec(v []float64) string {
	parts := make([]string, len(v))
	for i, x := range v {
		parts[i] = strconv.FormatFloat(x, 'g', 3, 64)
	}
	return "[" + strings.Join(parts, ", ") + "]"
}

// seenFrame rebuilds what the policy saw at frame t of the record's
// sequence: the pipeline's output depends only on its seed and t.
func seenFrame(p *Plan, src frameio.Random, grid *patch.Grid, pipe *patch.Pipeline, r *Record, t int) (image.Image, error) {
	in := p.Input
	raw := image.NewRGBA(image.Rect(0, 0, in.Width, in.Height))
	if err := src.ReadFrameAt(r.Start+t, raw); err != nil {
		return nil, err
	}
	var frame image.Image = raw
	if p.Width != in.Width || p.Height != in.Height {
		frame = imaging.Resize(raw, p.Width, p.Height, imaging.Linear)
	}
	tok := patch.NewTokenizer(grid)
	clean := patch.NewTokenSet(grid.N(), grid.D())
	pipe.Reset(r.PipeSeed)
	if err := pipe.TokenizeFrame(t, tok, frame, clean); err != nil {
		return nil, err
	}
	out := patch.NewTokenSet(pipe.Capacity(), grid.D())
	if err := pipe.Apply(t, clean, out, nil); err != nil {
		return nil, err
	}
	seen := image.NewRGBA(image.Rect(0, 0, grid.OutW, grid.OutH))
	if err := tok.Assemble(out, seen); err != nil {
		return nil, err
	}
	return seen, nil
}
