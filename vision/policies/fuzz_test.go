package policies_test

import (
	"errors"
	"testing"

	"tilebench/vision/policies"
)

// FuzzCheck: any text is classified and checked without a panic; a
// refused source is a *SourceError, and only file names and external
// targets can be refused.
func FuzzCheck(f *testing.F) {
	for _, s := range []string{"", "expert", "fresh", "mlp", "a-p{patch}.safetensors", "exec:", "exec:'x", "exec:python3 p.py --patch {patch}",
		"tcp://", "tcp://h:0", "tcp://[::1]:7000", "tcp://h:99999", "{patch}{patch}"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		k := policies.Kind(s)
		if err := policies.Check(s); err != nil {
			var se *policies.SourceError
			if !errors.As(err, &se) {
				t.Fatalf("Check(%q): %v is not a SourceError", s, err)
			}
			if k != policies.KindExternal && k != policies.KindFile {
				t.Fatalf("Check(%q) refused a %s source", s, k)
			}
		}
	})
}
