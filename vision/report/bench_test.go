package report

import "testing"

// BenchmarkHTML renders the example report (35 cells, 3 charts, 8 frames).
func BenchmarkHTML(b *testing.B) {
	d := demoData()
	b.ReportAllocs()
	for b.Loop() {
		if _, err := HTML(d); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkCSV(b *testing.B) {
	d := demoData()
	b.ReportAllocs()
	for b.Loop() {
		if _, err := CSV(d); err != nil {
			b.Fatal(err)
		}
	}
}
