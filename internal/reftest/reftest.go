// Package reftest runs the reference scripts in testdata/ref with Debian's
// Python, for tests that check tilebench against NumPy, SciPy and PyTorch.
//
// When /usr/bin/python3 or a module it needs is missing, a test is skipped,
// unless the environment variable TILEBENCH_REQUIRE_REF is set to 1 (as
// .ci/run does), in which case the test fails.
package reftest

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"testing"

	"tilebench/internal/atomicfile"
)

// Python is the interpreter the reference checks use: Debian's, never a
// virtual environment's.
const Python = "/usr/bin/python3"

// Required reports whether missing references must fail tests.
func Required() bool { return os.Getenv("TILEBENCH_REQUIRE_REF") == "1" }

// Need skips (or, when Required, fails) t unless Python can import every
// named module.
func Need(t testing.TB, modules ...string) {
	t.Helper()
	if _, err := os.Stat(Python); err != nil {
		missing(t, Python+" not found")
		return
	}
	for _, m := range modules {
		cmd := exec.Command(Python, "-c", "import "+m)
		if out, err := cmd.CombinedOutput(); err != nil {
			missing(t, "python module "+m+" not importable: "+string(bytes.TrimSpace(out)))
			return
		}
	}
}

func missing(t testing.TB, why string) {
	t.Helper()
	if Required() {
		t.Fatalf("reference check needs %s (TILEBENCH_REQUIRE_REF=1)", why)
	}
	t.Skipf("skipping reference check: %s", why)
}

// Root returns the module's root folder (where go.mod is).
func Root() string {
	_, file, _, _ := runtime.Caller(0)
	return filepath.Join(filepath.Dir(file), "..", "..")
}

// Script returns the path of a reference script in testdata/ref.
func Script(name string) string { return filepath.Join(Root(), "testdata", "ref", name) }

// Run runs a script from testdata/ref with args and returns its standard
// output; it fails t with the script's stderr if the script fails.
func Run(t testing.TB, script string, args ...string) []byte {
	t.Helper()
	cmd := exec.Command(Python, append([]string{Script(script)}, args...)...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("%s %v: %v\n%s", script, args, err, stderr.String())
	}
	return out
}

// RunJSON writes in as JSON to a temporary file, runs the reference script
// on that file and decodes the script's standard output into out.
func RunJSON(t testing.TB, script string, in, out any) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "in.json")
	data, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(Run(t, script, path), out); err != nil {
		t.Fatal(err)
	}
}

// Golden returns the reference document kept as JSON in the golden file
// path, for the offline half of a golden-then-live check. With update set
// (a test's -update-ref flag) it first needs the Python modules, computes
// the document live with ref and rewrites the file with it (indented,
// written atomically), then reads the file back as without update.
func Golden[T any](t testing.TB, path string, update bool, ref func() T, modules ...string) T {
	t.Helper()
	if update {
		Need(t, modules...)
		data, err := json.MarshalIndent(ref(), "", " ")
		if err != nil {
			t.Fatal(err)
		}
		if err := atomicfile.WriteBytes(path, append(data, '\n')); err != nil {
			t.Fatal(err)
		}
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var doc T
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	return doc
}
