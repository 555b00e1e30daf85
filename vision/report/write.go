package report

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"tilebench/internal/atomicfile"
)

// File names written by Write.
const (
	HTMLFile    = "report.html"
	SummaryFile = "summary.md"
	CSVFile     = "cells.csv"
)

// Write writes report.html, summary.md and cells.csv into dir (created if
// missing), each atomically: a failure leaves any earlier file of the same
// name untouched.
func Write(dir string, d *Data) error {
	if d == nil {
		return errors.New("report: no data")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	csv, err := CSV(d)
	if err != nil {
		return err
	}
	md, err := Markdown(d)
	if err != nil {
		return err
	}
	page, err := HTML(d)
	if err != nil {
		return err
	}
	for _, f := range []struct {
		name string
		data []byte
	}{{CSVFile, csv}, {SummaryFile, md}, {HTMLFile, page}} {
		if err := atomicfile.WriteBytes(filepath.Join(dir, f.name), f.data); err != nil {
			return fmt.Errorf("report: %w", err)
		}
	}
	return nil
}
