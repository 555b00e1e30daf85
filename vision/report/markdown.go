package report

import (
	"bytes"
	"fmt"
	"strings"
)

// mdEscaper makes a user string safe inside Markdown text and table cells:
// characters with Markdown meaning, and the < > & that would start raw
// HTML or an entity, get a backslash (CommonMark lets any ASCII
// punctuation be escaped so), and line breaks become spaces (a cell is one
// line).
var mdEscaper = strings.NewReplacer(
	`\`, `\\`, "`", "\\`", "*", `\*`, "_", `\_`, "[", `\[`, "]", `\]`,
	"|", `\|`, "#", `\#`, "<", `\<`, ">", `\>`, "&", `\&`,
	"\r\n", " ", "\n", " ", "\r", " ",
)

func md(s string) string { return mdEscaper.Replace(s) }

// fence returns a code fence longer than any backtick run in s.
func fence(s string) string {
	f := "```"
	for strings.Contains(s, f) {
		f += "`"
	}
	return f
}

func estText(v, lo, hi float64) string {
	if !finite(lo) && !finite(hi) {
		return num(v)
	}
	return fmt.Sprintf("%s [%s, %s]", num(v), num(lo), num(hi))
}

// Markdown returns the bytes of summary.md: the headline, the cost table,
// the per-cell table, how to reproduce the run and the caution.
func Markdown(d *Data) ([]byte, error) {
	v, err := buildView(d)
	if err != nil {
		return nil, err
	}
	var b bytes.Buffer
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	p("# %s\n\n", md(d.Title))
	var meta []string
	if d.Kind != "" {
		meta = append(meta, md(d.Kind))
	}
	meta = append(meta, fmt.Sprintf("%d episodes in %d cells", v.Episodes, len(d.Cells)))
	if d.Run.Failures > 0 {
		meta = append(meta, fmt.Sprintf("%d errors", d.Run.Failures))
	}
	meta = append(meta, fmt.Sprintf("seed %d", d.Run.Seed))
	if d.Generated != "" {
		meta = append(meta, "written "+md(d.Generated))
	}
	p("%s\n\n", strings.Join(meta, " · "))

	p("## At a glance\n\n")
	if r := d.Recommendation; r != nil {
		if r.Choice != "" {
			p("- **Recommended: %s.**", md(r.Choice))
		} else {
			p("- **No recommendation.**")
		}
		if r.Detail != "" {
			p(" %s", md(r.Detail))
		}
		p("\n")
		if r.Rule != "" {
			p("  Rule: %s.\n", md(strings.TrimSuffix(r.Rule, ".")))
		}
	}
	for _, f := range d.Findings {
		p("- **%s:** %s\n", md(f.Key), md(f.Value))
	}
	if d.Recommendation == nil && len(v.Breaks) == 0 && len(d.Findings) == 0 {
		p("- %d cells measured; see the table below.\n", len(d.Cells))
	}
	if len(v.Breaks) > 0 {
		p("\n### Where it breaks\n\n")
		p("| axis | context | breaking point | first dip |\n|---|---|---|---|\n")
		for _, br := range v.Breaks {
			bp := "**" + md(br.Big) + "**"
			if !br.Reached {
				bp = md(br.Big)
			}
			if br.Sub != "" {
				bp += " (" + md(br.Sub) + ")"
			}
			p("| %s | %s | %s | %s |\n", md(br.Axis), md(br.Context), bp, md(br.Dip))
		}
		p("\n%s\n", md(v.BreakRule))
	}
	p("\n> **Caution.** %s\n\n", md(Caution))

	if len(v.Costs) > 0 {
		p("## Cost of each candidate\n\n")
		p("| candidate | patch | tokens | MFLOP/step | parameters | latency µs/step | score [95%% CI] |\n")
		p("|---|--:|--:|--:|--:|--:|--:|\n")
		for _, c := range v.Costs {
			name := md(c.Name)
			if c.Pick {
				name = "**" + name + "** (recommended)"
			}
			if c.OverBudget {
				name += " (over budget)"
			}
			p("| %s | %s | %s | %s | %s | %s | %s |\n", name, c.Patch, c.Tokens, c.MFLOP, c.Params, c.Latency, c.Score)
		}
		p("\n")
	}

	for _, t := range v.Tables {
		p("## %s\n\n", md(t.Title))
		if t.Caption != "" {
			p("%s\n\n", md(t.Caption))
		}
		cols := make([]string, len(t.Columns))
		seps := make([]string, len(t.Columns))
		for i, c := range t.Columns {
			cols[i], seps[i] = md(c), "---"
		}
		p("| %s |\n|%s|\n", strings.Join(cols, " | "), strings.Join(seps, "|"))
		for _, row := range t.Rows {
			cells := make([]string, len(row))
			for i, c := range row {
				cells[i] = md(c)
			}
			p("| %s |\n", strings.Join(cells, " | "))
		}
		p("\n")
	}

	if len(d.Cells) > 0 {
		p("## Every cell\n\n")
		p("| cell | episodes | errors | IQM [95%% CI] | mean [95%% CI] | median | std | game failures | time-ups | CVaR 10%% | retention [95%% CI] | share of expert | note |\n")
		p("|---|--:|--:|--:|--:|--:|--:|--:|--:|--:|--:|--:|---|\n")
		for _, c := range v.Cells {
			note := c.Note
			if c.Warn != "" {
				note = strings.TrimSpace(note + " " + c.Warn)
			}
			p("| %s | %d | %d | %s | %s | %s | %s | %s | %s | %s | %s | %s | %s |\n", md(c.ID), c.Episodes, c.Failures,
				c.IQMText, c.MeanText, c.Median, c.Std, md(c.Fail), md(c.TimeUp), c.CVaR, c.RetText, c.Expert, md(note))
		}
		if v.Resamples > 0 {
			p("\nIntervals: percentile bootstrap (BCa below 20 episodes), %d resamples, %s%% level. Retention is normalised, (IQM − floor) / (clean IQM − floor), paired over the shared seeds. Errors count at the study's worst return. Game failures and time-ups: shares of played episodes, Wilson intervals. CVaR 10%%: mean of the worst tenth of the returns.\n", v.Resamples, num(v.Level*100))
		}
		p("\n")
	}

	p("## Reproduce this run\n\n")
	if d.Run.Command != "" {
		f := fence(d.Run.Command)
		p("%ssh\n%s\n%s\n\n", f, d.Run.Command, f)
	}
	p("| setting | value |\n|---|---|\n")
	p("| seed | %d |\n", d.Run.Seed)
	for _, kv := range d.Run.Params {
		p("| %s | %s |\n", md(kv.Key), md(kv.Value))
	}
	for _, kv := range d.Run.Versions {
		p("| %s | %s |\n", md(kv.Key), md(kv.Value))
	}
	p("\n")
	if len(d.Notes) > 0 {
		p("## Notes\n\n")
		for _, n := range d.Notes {
			p("- %s\n", md(n))
		}
		p("\n")
	}
	return b.Bytes(), nil
}
