package reftest

import (
	"os"
	"path/filepath"
	"testing"
)

type goldenDoc struct {
	Name   string    `json:"name"`
	Values []float64 `json:"values"`
}

// Golden reads the committed file without update, and with update
// rewrites it from the live reference before reading it back.
func TestGolden(t *testing.T) {
	path := filepath.Join(t.TempDir(), "golden.json")
	if err := os.WriteFile(path, []byte(`{"name": "kept", "values": [1, 2.5]}`), 0o644); err != nil {
		t.Fatal(err)
	}
	calls := 0
	live := func() goldenDoc { calls++; return goldenDoc{Name: "live", Values: []float64{3}} }

	doc := Golden(t, path, false, live)
	if calls != 0 || doc.Name != "kept" || len(doc.Values) != 2 || doc.Values[1] != 2.5 {
		t.Fatalf("without update: %d live calls, %+v", calls, doc)
	}

	// Update needs Python (the live reference is a script); this one is
	// Go, so only the interpreter's presence is checked.
	doc = Golden(t, path, true, live)
	if calls != 1 || doc.Name != "live" || len(doc.Values) != 1 || doc.Values[0] != 3 {
		t.Fatalf("with update: %d live calls, %+v", calls, doc)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if want := "{\n \"name\": \"live\",\n \"values\": [\n  3\n ]\n}\n"; string(data) != want {
		t.Fatalf("rewritten file %q, want %q", data, want)
	}
}
