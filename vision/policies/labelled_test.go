package policies_test

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/vision/policies"
)

// The --policy grammar of a study comparing policies: labelled values,
// one unlabelled value as before, and every bad list refused with one
// line naming the problem (the rules of docs/studies.md).
func TestParseList(t *testing.T) {
	single, list, err := policies.ParseList([]string{"exec:python3 p.py --x=1"})
	if err != nil || list != nil || single != "exec:python3 p.py --x=1" {
		t.Fatalf("one exec: source with '=': %q %v %v", single, list, err)
	}
	single, list, err = policies.ParseList([]string{"clean=a.safetensors", "occl=exec:python3 p.py --patch {patch}", "t=tcp://127.0.0.1:7000"})
	if err != nil || single != "" || len(list) != 3 || list[1].Label != "occl" || list[1].Source != "exec:python3 p.py --patch {patch}" {
		t.Fatalf("labelled list: %q %v %v", single, list, err)
	}
	// Unlabelled values only: the last counts, as before lists existed.
	if single, list, err = policies.ParseList([]string{"expert", "fresh"}); err != nil || list != nil || single != "fresh" {
		t.Fatalf("two unlabelled values: %q %v %v", single, list, err)
	}
	if _, list, err = policies.ParseList([]string{"only=expert"}); err != nil || len(list) != 1 || list[0].Label != "only" {
		t.Fatalf("one labelled policy: %v %v", list, err)
	}
	// A file whose name holds '=' stays a source when it exists.
	dir := t.TempDir()
	odd := filepath.Join(dir, "lr=0.1.safetensors")
	if err := os.WriteFile(odd, nil, 0o644); err != nil {
		t.Fatal(err)
	}
	if single, _, err = policies.ParseList([]string{odd}); err != nil || single != odd {
		t.Fatalf("existing file with '=': %q %v", single, err)
	}
	for _, c := range []struct {
		in   []string
		want string
	}{
		{[]string{"a=x", "a=y"}, `"a" is given twice`},
		{[]string{"Run=x", "run=y"}, "differ only in case"},
		{[]string{"a/b=x", "c=y"}, "cannot be part of a file name"},
		{[]string{"a b=x"}, ""}, // white space: not a label, an unreadable file later
		{[]string{"=x"}, "label is empty"},
		{[]string{".hidden=x"}, "may not start with '.'"},
		{[]string{"a=x", "y.safetensors"}, "has no label"},
		{[]string{"a=x", "b="}, "no policy given"},
		{[]string{strings.Repeat("l", 41) + "=x"}, "longer than 40"},
		{[]string{"é=x"}, "cannot be part of a file name"},
	} {
		_, _, err := policies.ParseList(c.in)
		if c.want == "" {
			if err != nil {
				t.Errorf("%q: %v, want it taken as a source", c.in, err)
			}
			continue
		}
		var se *policies.SourceError
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") || !errors.As(err, &se) {
			t.Errorf("%q: %v, want a one-line SourceError with %q", c.in, err, c.want)
		}
	}
}

// FuzzParseList: any values parse or are refused without a panic; a
// refusal is a one-line SourceError, and an accepted list has distinct
// safe labels.
func FuzzParseList(f *testing.F) {
	for _, s := range [][2]string{{"a=x", "b=y"}, {"a=x", "a=y"}, {"=x", ""}, {"exec:p --q=1", ""}, {".a=x", "b=x"}, {"a/b=x", "c=d"}, {"x", "y"}, {"A=1", "a=2"}} {
		f.Add(s[0], s[1])
	}
	f.Fuzz(func(t *testing.T, a, b string) {
		vals := []string{a}
		if b != "" {
			vals = append(vals, b)
		}
		_, list, err := policies.ParseList(vals)
		if err != nil {
			var se *policies.SourceError
			if !errors.As(err, &se) || strings.Contains(err.Error(), "\n") && !strings.Contains(a+b, "\n") {
				t.Fatalf("%q: %v", vals, err)
			}
			return
		}
		seen := map[string]bool{}
		for _, l := range list {
			if policies.CheckLabel(l.Label) != nil || seen[strings.ToLower(l.Label)] {
				t.Fatalf("%q: accepted bad or repeated label %q", vals, l.Label)
			}
			seen[strings.ToLower(l.Label)] = true
		}
	})
}
