package analysis

import (
	"math"
	"os"
	"path/filepath"
	"testing"
)

// FuzzReadFloors: any floors.json either reads as a format 1 table or is
// a one-line error, and a table read is safe to index by episode however
// short or long its lists are.
func FuzzReadFloors(f *testing.F) {
	f.Add([]byte(`{"format":1,"study":"ab","floor":"idle","floors":[{"variation":"","returns":[-1,2]}]}`))
	f.Add([]byte(`{"format":1,"floors":[{"returns":[1],"errors":["x","y","z"]}],"expert":[{"variation":"dusk"}]}`))
	f.Add([]byte(`{"format":2}`))
	f.Add([]byte(`not json`))
	f.Fuzz(func(t *testing.T, data []byte) {
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, FloorsFile), data, 0o644); err != nil {
			t.Fatal(err)
		}
		ft, err := ReadFloors(dir)
		if err != nil {
			if ft != nil {
				t.Fatal("a table with an error")
			}
			return
		}
		for _, bs := range [][]Baseline{ft.Floors, ft.Expert} {
			for _, b := range bs {
				col := byEpisode(bs, b.Variation, 5)
				for e, v := range col {
					if !math.IsNaN(v) && (e >= len(b.Returns)) {
						t.Fatalf("episode %d has a return the table does not hold", e)
					}
				}
			}
		}
	})
}
