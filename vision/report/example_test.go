package report_test

import (
	"fmt"
	"os"
	"path/filepath"

	"tilebench/vision/report"
	"tilebench/vision/stats"
)

func ExampleWrite() {
	// Two cells of invented example returns.
	clean := stats.Strata{{410, 395, 402, 388, 420, 399}}
	dark := stats.Strata{{210, 180, 240, 199, 225, 205}}
	bs := stats.Bootstrap{Seed: 1}
	sc, _ := bs.Summarize(clean)
	sd, _ := bs.Summarize(dark)
	ret, _ := bs.Retention(dark, clean, stats.StatIQM)
	d := &report.Data{
		Title: "Example: one occlusion level",
		Run:   report.Run{Command: "tilebench stress --game drive --occlude random:0.5", Seed: 1},
		Cells: []report.Cell{
			{ID: "clean", Axis: "clean", Episodes: 6, Summary: sc},
			{ID: "occlude=random:0.5", Axis: "occlude", Kind: "random", Severity: 0.5, Episodes: 6, Summary: sd, Retention: &ret},
		},
	}
	dir, _ := os.MkdirTemp("", "report-example")
	defer os.RemoveAll(dir)
	if err := report.Write(dir, d); err != nil {
		fmt.Println(err)
		return
	}
	for _, f := range []string{report.HTMLFile, report.SummaryFile, report.CSVFile} {
		_, err := os.Stat(filepath.Join(dir, f))
		fmt.Println(f, err == nil)
	}
	// Output:
	// report.html true
	// summary.md true
	// cells.csv true
}
