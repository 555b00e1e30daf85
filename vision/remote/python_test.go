package remote

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/internal/reftest"
)

// TestRefPythonHelper runs the tests of python/tilebench_protocol.py (a
// scripted tilebench side over in-memory streams and TCP; recordings
// written with numpy.save), then installs the helper offline the way
// python/README.md says (pip with --no-build-isolation, Debian's
// setuptools) into a scratch folder and imports it from there.
func TestRefPythonHelper(t *testing.T) {
	reftest.Need(t, "numpy", "setuptools", "pip")
	dir := filepath.Join(reftest.Root(), "python")
	cmd := exec.Command(reftest.Python, "-m", "unittest", "discover", "-s", dir, "-p", "test_*.py")
	cmd.Env = append(os.Environ(), "PYTHONDONTWRITEBYTECODE=1")
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("python helper tests: %v\n%s", err, out)
	}
	// Build from a copy so that the source folder gets no build/ or
	// egg-info from setuptools.
	src := filepath.Join(t.TempDir(), "src")
	if err := os.MkdirAll(src, 0o755); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"pyproject.toml", "README.md", "tilebench_protocol.py"} {
		b, err := os.ReadFile(filepath.Join(dir, f))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(src, f), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	target := filepath.Join(t.TempDir(), "site")
	pip := exec.Command(reftest.Python, "-m", "pip", "install", "--quiet", "--no-build-isolation", "--no-index",
		"--no-deps", "--disable-pip-version-check", "--target", target, src)
	pip.Env = append(os.Environ(), "PIP_NO_CACHE_DIR=1")
	if out, err := pip.CombinedOutput(); err != nil {
		t.Fatalf("pip install --no-build-isolation ./python: %v\n%s", err, out)
	}
	imp := exec.Command(reftest.Python, "-c", "import tilebench_protocol as tp; print(tp.__file__, tp.PROTOCOL)")
	imp.Dir = t.TempDir()
	imp.Env = append(os.Environ(), "PYTHONPATH="+target)
	out, err := imp.CombinedOutput()
	if err != nil || !strings.HasPrefix(string(out), target) || !strings.HasSuffix(strings.TrimSpace(string(out)), " 1") {
		t.Fatalf("import of the installed helper: %v\n%s", err, out)
	}
}
