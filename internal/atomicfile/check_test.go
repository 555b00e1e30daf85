package atomicfile

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestCheckFileAndDir(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "f")
	os.WriteFile(file, []byte("x"), 0o644)
	for _, c := range []struct {
		path, want string
	}{
		{dir, "is a folder"},
		{filepath.Join(dir, "missing", "out.safetensors"), "does not exist"},
		{filepath.Join(file, "out"), "is not a folder"},
	} {
		if err := CheckFile(c.path); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("CheckFile(%s): %v, want %q", c.path, err, c.want)
		}
	}
	if err := CheckFile(file); err != nil {
		t.Errorf("existing file: %v", err)
	}
	if err := CheckFile(filepath.Join(dir, "new")); err != nil {
		t.Errorf("new file: %v", err)
	}
	if err := CheckDir(file); err == nil || !strings.Contains(err.Error(), "is a file") {
		t.Errorf("CheckDir(file): %v", err)
	}
	if err := CheckDir(filepath.Join(dir, "a", "b")); err != nil {
		t.Errorf("new nested folder: %v", err)
	}
	if err := CheckDir(filepath.Join(file, "sub")); err == nil {
		t.Error("folder under a file accepted")
	}
	if os.Geteuid() != 0 { // root writes anywhere
		ro := filepath.Join(dir, "ro")
		os.Mkdir(ro, 0o555)
		if err := CheckFile(filepath.Join(ro, "x")); err == nil || !strings.Contains(err.Error(), "not writable") {
			t.Errorf("read-only folder: %v", err)
		}
	}
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if e.Name() != "f" && e.Name() != "ro" {
			t.Errorf("checks left %s behind", e.Name())
		}
	}
}
