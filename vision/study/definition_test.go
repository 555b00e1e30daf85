package study

import (
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

func TestExpandList(t *testing.T) {
	cases := []struct {
		in   string
		want []string
	}{
		{"random:0:0.9:0.1", []string{"random:0", "random:0.1", "random:0.2", "random:0.3", "random:0.4", "random:0.5", "random:0.6", "random:0.7", "random:0.8", "random:0.9"}},
		{"random:0:0.9:0.1,block:0.3", nil}, // length checked below
		{"none,full", []string{"none", "full"}},
		{"0,10,100", []string{"0", "10", "100"}},
		{"0:1:0.3", []string{"0", "0.3", "0.6", "0.9"}},
		{"4:16:4", []string{"4", "8", "12", "16"}},
		{" partial:0.25:0.75:0.25 , local:1 ", []string{"partial:0.25", "partial:0.5", "partial:0.75", "local:1"}},
		{"-0.2:0.2:0.1", []string{"-0.2", "-0.1", "0", "0.1", "0.2"}},
		{"0.05:0.15:0.05", []string{"0.05", "0.1", "0.15"}},
		{"mask:a:b.png", []string{"mask:a:b.png"}},
		{"1e-1", []string{"0.1"}},
		{"3:3:1", []string{"3"}},
		{"default,tarn+narrow", []string{"default", "tarn+narrow"}},
	}
	for _, c := range cases {
		got, err := ExpandList(c.in)
		if err != nil {
			t.Errorf("%q: %v", c.in, err)
			continue
		}
		if c.want == nil {
			if len(got) != 11 || got[10] != "block:0.3" {
				t.Errorf("%q: %v", c.in, got)
			}
			continue
		}
		if !reflect.DeepEqual(got, c.want) {
			t.Errorf("%q: got %v, want %v", c.in, got, c.want)
		}
	}
}

func TestExpandListErrors(t *testing.T) {
	for in, want := range map[string]string{
		"":                 "empty list",
		"none,,full":       "empty item",
		"random:0.9:0:0.1": "yields no values",
		"random:0:1:0":     "must be positive",
		"random:0:1:-0.1":  "must be positive",
		"0:1e9:1e-9":       "more than",
		"random:x":         "not a finite number",
		"random:NaN":       "not a finite number",
		"0:1:2:3:4":        "want VALUE",
		"Ünïcode":          "neither a number nor a word",
		"mask:":            "needs a file",
		"0x10":             "neither a number nor a word",
		"random:0x1p-2":    "plain decimal",
	} {
		_, err := ExpandList(in)
		if err == nil || !strings.Contains(err.Error(), want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%q: err %v, want one line containing %q", in, err, want)
		}
	}
}

const exampleStudy = `# a study
name = "drive occlusion"
game = "drive"
episodes = 12
seed = 7

[policy]
source = "fresh"
family = "attention"

patch = [4, 8]

[axes]
occlude = "random:0:0.6:0.2,block:0.3"
scramble = ["none", "full"]
every = [0, 10]
noise_tokens = 0
`

func TestParseStudy(t *testing.T) {
	// "patch" after [policy] belongs to the policy table in TOML: put it
	// first in the real file.
	src := strings.Replace(exampleStudy, "\npatch = [4, 8]\n", "", 1)
	src = "patch = [4, 8]\n" + src
	d, err := Parse([]byte(src))
	if err != nil {
		t.Fatal(err)
	}
	if d.Name != "drive occlusion" || d.Episodes != 12 || d.Seed != 7 || d.Policy.Source != "fresh" {
		t.Fatalf("%+v", d)
	}
	if !reflect.DeepEqual(d.Patch, Axis{"4", "8"}) || !reflect.DeepEqual(d.Axes.Every, Axis{"0", "10"}) {
		t.Fatalf("patch %v every %v", d.Patch, d.Axes.Every)
	}
	cells, err := d.Cells()
	if err != nil {
		t.Fatal(err)
	}
	// 2 patches × (none + 3 random + block) × (none, full/0, full/10).
	if len(cells) != 2*5*3 {
		t.Fatalf("%d cells", len(cells))
	}
}

func TestParseErrorsNameLineAndKey(t *testing.T) {
	for _, c := range []struct{ src, want string }{
		{"name = \"x\"\nepisodes = 3\nepisods = 4\n", `line 3: unknown key "episods"`},
		{"name = \"x\"\n[axes]\nocclude = \"random:0.1\"\nscrambel = \"full\"\n", `line 4: unknown key "axes.scrambel"`},
		{"[policy]\nsource = \"expert\"\nweights = \"a\"\n", `line 3: unknown key "policy.weights"`},
		{"name = \"x\"\n\n[axes]\nocclude = \"random:0.9:0:0.1\"\n", `line 4: key "axes.occlude"`},
		{"episodes = -3\n", `line 1: key "episodes"`},
		{"name = \"x\"\nepisodes = \"many\"\n", "line 2"},
		{"name = \"x\nepisodes = 3\n", "line 1"},
		{"[axes]\nfill = \"purple\"\n", `line 2: key "axes.fill"`},
		{"[axes]\nevery = [1.5]\n", `key "axes.every"`},
		{"[axes]\nscramble = []\n", "empty list"},
		{"[axes]\nocclude = {a = 1}\n", "line 2"},
		{"seeds = \"5:3\"\nepisodes = 10\n", `key "seeds"`},
	} {
		_, err := Parse([]byte(c.src))
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%q: err %v, want one line containing %q", c.src, err, c.want)
		}
	}
}

func TestExampleStudyFileParses(t *testing.T) {
	path := filepath.Join("..", "..", "examples", "study.toml")
	if _, err := os.Stat(path); err != nil {
		t.Skip("examples/study.toml not present")
	}
	d, err := LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := NewPlan(*d); err != nil {
		t.Fatal(err)
	}
}

func TestFingerprintIgnoresWorkers(t *testing.T) {
	a, err := NewPlan(Definition{Episodes: 3, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	b, err := NewPlan(Definition{Episodes: 3, Workers: 4})
	if err != nil {
		t.Fatal(err)
	}
	c, err := NewPlan(Definition{Episodes: 4})
	if err != nil {
		t.Fatal(err)
	}
	if a.Fingerprint != b.Fingerprint || a.Fingerprint == c.Fingerprint {
		t.Fatalf("fingerprints %s %s %s", a.Fingerprint, b.Fingerprint, c.Fingerprint)
	}
}

func FuzzExpandList(f *testing.F) {
	for _, s := range []string{"random:0:0.9:0.1,block:0.3", "none,full", "0,10,100", "0:1:0.3", "mask:x.png", "", ",", "1e308:1e309:1", "0:1:1e-300", "a:b:c:d"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		vals, err := ExpandList(s)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("multi-line error %q", err)
			}
			return
		}
		if len(vals) == 0 || len(vals) > maxRangeValues {
			t.Fatalf("%q: %d values", s, len(vals))
		}
		for _, v := range vals {
			if v == "" {
				t.Fatalf("%q: empty value", s)
			}
		}
	})
}

func FuzzParse(f *testing.F) {
	f.Add([]byte(exampleStudy))
	f.Add([]byte("name = \"x\"\n[axes]\nocclude = \"random:0:0.9:0.1\"\n"))
	f.Add([]byte("[stats]\nresamples = 500\nthreshold = 0.3\n[budget]\nus = 200\n"))
	f.Add([]byte("strips = [0, 10]\nseeds = \"0:100\"\n"))
	f.Add([]byte("[axes]\nvariations = \"default,dusk\"\nbrightness = [-0.2, 0.2]\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) > 1<<14 {
			return
		}
		d, err := Parse(data)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("multi-line error %q", err)
			}
			return
		}
		p, err := NewPlan(*d)
		if err != nil {
			t.Fatalf("parsed study does not plan: %v", err)
		}
		if len(p.Cells) == 0 || p.Units() <= 0 {
			t.Fatalf("empty plan")
		}
	})
}
