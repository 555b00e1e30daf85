package report

// CSV returns the bytes of cells.csv for d.
func CSV(d *Data) ([]byte, error) { return nil, nil }

// Markdown returns the bytes of summary.md for d.
func Markdown(d *Data) ([]byte, error) { return nil, nil }

// HTML returns the bytes of report.html for d.
func HTML(d *Data) ([]byte, error) { return nil, nil }
