package policies

import (
	"os"
	"strings"
)

// Labelled is one policy of a study that compares several: a short label
// (it names the policy in reports and may become part of a file name)
// and a source in this package's grammar.
type Labelled struct {
	// Label is the policy's name in the study: 1 to 40 letters, digits,
	// '-', '_' and '.', not starting with '.'.
	Label string `toml:"label" json:"label"`
	// Source is the policy source (expert, a weights FILE, exec:, ...).
	Source string `toml:"source" json:"source"`
}

// maxLabel is the longest policy label.
const maxLabel = 40

// labelChars describes the characters a label may hold.
const labelChars = "letters, digits, '-', '_' and '.' (not first)"

// CheckLabel refuses a label that is empty, too long, or holds a
// character other than letters, digits, '-', '_' and '.' (so that it is
// a safe file name on every system), or starts with '.'.
func CheckLabel(label string) error {
	switch {
	case label == "":
		return sourceErr("policy label is empty: write LABEL=SOURCE with a label of %s", labelChars)
	case len(label) > maxLabel:
		return sourceErr("policy label %q: longer than %d characters", label, maxLabel)
	case label[0] == '.':
		return sourceErr("policy label %q: may not start with '.'", label)
	}
	for _, r := range label {
		if !labelRune(r) {
			return sourceErr("policy label %q: %q cannot be part of a file name; use %s", label, r, labelChars)
		}
	}
	return nil
}

func labelRune(r rune) bool {
	return r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' || r == '_' || r == '.'
}

// parseLabelled reads one --policy value. LABEL=SOURCE is labelled when
// the text before the first '=' holds no ':' and no white space (so that
// "exec:python3 p.py --x=1" and "tcp://h:1" stay unlabelled sources); the
// label is then checked (CheckLabel), unless the whole value names an
// existing file (runs/lr=0.1/p8.safetensors stays a source). A file whose name holds '=' is
// given with a label: "a=dir/x=y.safetensors".
func parseLabelled(s string) (Labelled, bool, error) {
	label, src, ok := strings.Cut(s, "=")
	if !ok || strings.ContainsAny(label, ": \t\n") {
		return Labelled{Source: s}, false, nil
	}
	if err := CheckLabel(label); err != nil {
		if _, serr := os.Stat(s); serr == nil {
			// A file whose name holds '=' (runs/lr=0.1/p8.safetensors).
			return Labelled{Source: s}, false, nil
		}
		return Labelled{}, true, err
	}
	if err := Check(src); err != nil {
		return Labelled{}, true, sourceErr("policy %s: %v", label, err)
	}
	return Labelled{Label: label, Source: src}, true, nil
}

// ParseList reads the values of a repeated --policy: unlabelled values
// name the single policy of a study (nil list; the last one given
// counts, as for any flag given twice); otherwise every value must be
// LABEL=SOURCE (CheckList), and mixing the two is an error.
func ParseList(values []string) (single string, list []Labelled, err error) {
	if len(values) == 0 {
		return "", nil, nil
	}
	labelled := 0
	for _, v := range values {
		l, ok, err := parseLabelled(v)
		if err != nil {
			return "", nil, err
		}
		if ok {
			labelled++
		}
		list = append(list, l)
	}
	if labelled == 0 {
		// Unlabelled only: the last one counts, as for every flag given
		// twice (a later flag overrides an earlier one).
		return values[len(values)-1], nil, nil
	}
	if labelled != len(values) {
		for _, l := range list {
			if l.Label == "" {
				return "", nil, sourceErr("--policy %q has no label, but other --policy values have one: label every policy (--policy LABEL=SOURCE) or give one", l.Source)
			}
		}
	}
	return "", list, CheckList(list)
}

// CheckList refuses a labelled list with an empty or unsafe label (see
// CheckLabel), the same label twice, or a bad source (Check).
func CheckList(list []Labelled) error {
	seen := map[string]string{}
	for _, l := range list {
		if err := CheckLabel(l.Label); err != nil {
			return err
		}
		// Case-folded: labels name files, and some file systems fold case.
		k := strings.ToLower(l.Label)
		if was, ok := seen[k]; ok {
			if was != l.Label {
				return sourceErr("policy labels %q and %q differ only in case: every policy needs its own label (labels name files)", was, l.Label)
			}
			return sourceErr("policy label %q is given twice: every policy needs its own label", l.Label)
		}
		seen[k] = l.Label
		if err := Check(l.Source); err != nil {
			return sourceErr("policy %s: %v", l.Label, err)
		}
	}
	return nil
}

// Labels lists the labels of list, in order.
func Labels(list []Labelled) []string {
	out := make([]string, len(list))
	for i, l := range list {
		out[i] = l.Label
	}
	return out
}

// ListString is list as LABEL=SOURCE, comma-separated, for messages.
func ListString(list []Labelled) string {
	parts := make([]string, len(list))
	for i, l := range list {
		parts[i] = l.Label + "=" + l.Source
	}
	return strings.Join(parts, ", ")
}

// listFlag collects a repeated --policy.
type listFlag struct {
	values *[]string
	last   *string
}

func (l listFlag) String() string {
	if l.last == nil {
		return ""
	}
	return *l.last
}

func (l listFlag) Set(s string) error {
	*l.values = append(*l.values, s)
	*l.last = s
	return nil
}

// List returns the policies the command line gives: the single source
// (with list nil) for one unlabelled --policy or none (the default), or
// the labelled list for --policy LABEL=SOURCE given once or more. Only a
// command whose FlagConfig set Multi collects more than one value.
func (f *Flags) List() (single string, list []Labelled, err error) {
	if len(f.values) == 0 {
		return f.Source, nil, nil
	}
	return ParseList(f.values)
}
