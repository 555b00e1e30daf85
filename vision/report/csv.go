package report

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
	"strconv"
	"strings"

	"tilebench/vision/stats"
)

// CSVColumns are the columns of cells.csv, in order (documented in
// docs/report.md). New columns are only ever appended, with a new format
// number.
var CSVColumns = []string{
	"format", "cell", "patch", "axis", "kind", "severity",
	"episodes", "failures", "n",
	"mean", "mean_lo", "mean_hi",
	"median", "median_lo", "median_hi",
	"iqm", "iqm_lo", "iqm_hi",
	"std", "min", "max",
	"retention", "retention_lo", "retention_hi",
	"level", "resamples", "params", "note",
	"errors", "game_failed", "game_failed_lo", "game_failed_hi",
	"time_up", "time_up_lo", "time_up_hi", "cvar10",
	"expert_share", "expert_share_lo", "expert_share_hi", "interval_method", "warning",
}

// CSVFormat is the format number in the first column of cells.csv.
// Format 2 appended the columns from "errors" on and made "retention"
// the normalised retention.
const CSVFormat = "2"

// csvFloat writes the shortest decimal that reads back to the same
// float64; NaN is empty, infinities are "inf" and "-inf".
func csvFloat(v float64) string {
	switch {
	case math.IsNaN(v):
		return ""
	case math.IsInf(v, 1):
		return "inf"
	case math.IsInf(v, -1):
		return "-inf"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

func csvInt(v int) string {
	if v == 0 {
		return ""
	}
	return strconv.Itoa(v)
}

// joinParams renders cell parameters as "key=value; key=value".
func joinParams(kv []KV) string {
	parts := make([]string, len(kv))
	for i, p := range kv {
		parts[i] = p.Key + "=" + p.Value
	}
	return strings.Join(parts, "; ")
}

// CSV returns the bytes of cells.csv: a header of CSVColumns and one row
// per cell in the order of d.Cells (RFC 4180 quoting by encoding/csv).
func CSV(d *Data) ([]byte, error) {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	if err := w.Write(CSVColumns); err != nil {
		return nil, fmt.Errorf("cells.csv: %w", err)
	}
	for _, c := range d.Cells {
		s := c.Summary
		level, resamples := s.IQM.Level, s.IQM.Resamples
		rv, rlo, rhi := math.NaN(), math.NaN(), math.NaN()
		if c.Retention != nil {
			rv, rlo, rhi = c.Retention.Value, c.Retention.Lo, c.Retention.Hi
		}
		ev, elo, ehi := math.NaN(), math.NaN(), math.NaN()
		if c.Expert != nil {
			ev, elo, ehi = c.Expert.Value, c.Expert.Lo, c.Expert.Hi
		}
		cvar := math.NaN()
		if c.CVaR != nil {
			cvar = *c.CVaR
		}
		method := s.IQM.Method
		if method == "" && s.N > 0 {
			method = "percentile"
		}
		rate := func(r stats.Rate) []string {
			if r.Of == 0 {
				return []string{"", "", ""}
			}
			return []string{csvFloat(r.Value), csvFloat(r.Lo), csvFloat(r.Hi)}
		}
		row := []string{
			CSVFormat, c.ID, csvInt(c.Patch), c.Axis, c.Kind, csvFloat(c.Severity),
			strconv.Itoa(c.Episodes), strconv.Itoa(c.Failures), strconv.Itoa(s.N),
			csvFloat(s.Mean.Value), csvFloat(s.Mean.Lo), csvFloat(s.Mean.Hi),
			csvFloat(s.Median.Value), csvFloat(s.Median.Lo), csvFloat(s.Median.Hi),
			csvFloat(s.IQM.Value), csvFloat(s.IQM.Lo), csvFloat(s.IQM.Hi),
			csvFloat(s.Std), csvFloat(s.Min), csvFloat(s.Max),
			csvFloat(rv), csvFloat(rlo), csvFloat(rhi),
			csvFloat(level), strconv.Itoa(resamples), joinParams(c.Params), c.Note,
			strconv.Itoa(c.Failures),
		}
		row = append(row, rate(c.GameFailed)...)
		row = append(row, rate(c.TimeUp)...)
		row = append(row, csvFloat(cvar), csvFloat(ev), csvFloat(elo), csvFloat(ehi), method, c.Warn)
		if len(row) != len(CSVColumns) {
			return nil, fmt.Errorf("cells.csv: %d values for %d columns", len(row), len(CSVColumns))
		}
		if err := w.Write(row); err != nil {
			return nil, fmt.Errorf("cells.csv: cell %q: %w", c.ID, err)
		}
	}
	w.Flush()
	if err := w.Error(); err != nil {
		return nil, fmt.Errorf("cells.csv: %w", err)
	}
	return buf.Bytes(), nil
}
