package atomicfile

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// CheckFile reports, before any work is done, why Write could not put a
// file at path: path is an existing folder, its parent folder is missing
// or is not a folder, or the parent is not writable (tested by creating
// and removing a temporary file there, as Write will). An existing file
// at path is fine: Write replaces it.
func CheckFile(path string) error {
	if path == "" {
		return errors.New("no output file given")
	}
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		return fmt.Errorf("output %s is a folder; give a file name", path)
	}
	dir := filepath.Dir(path)
	st, err := os.Stat(dir)
	switch {
	case errors.Is(err, os.ErrNotExist):
		return fmt.Errorf("output %s: folder %s does not exist", path, dir)
	case err != nil:
		return fmt.Errorf("output %s: %w", path, err)
	case !st.IsDir():
		return fmt.Errorf("output %s: %s is not a folder", path, dir)
	}
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".check-*")
	if err != nil {
		return fmt.Errorf("output %s: folder %s is not writable", path, dir)
	}
	name := f.Name()
	f.Close()
	os.Remove(name)
	return nil
}

// CheckDir reports why files could not be written into the folder dir
// (created if missing, with its parents): dir exists and is not a
// folder, or the nearest existing folder above it (or dir itself) is not
// writable.
func CheckDir(dir string) error {
	if dir == "" {
		return errors.New("no output folder given")
	}
	st, err := os.Stat(dir)
	if err == nil && !st.IsDir() {
		return fmt.Errorf("output folder %s is a file", dir)
	}
	probe := dir
	for err != nil {
		if !errors.Is(err, os.ErrNotExist) {
			return fmt.Errorf("output folder %s: %w", dir, err)
		}
		up := filepath.Dir(probe)
		if up == probe {
			break
		}
		probe = up
		st, err = os.Stat(probe)
		if err == nil && !st.IsDir() {
			return fmt.Errorf("output folder %s: %s is a file", dir, probe)
		}
	}
	f, err := os.CreateTemp(probe, ".tilebench-check-*")
	if err != nil {
		return fmt.Errorf("output folder %s: %s is not writable", dir, probe)
	}
	name := f.Name()
	f.Close()
	os.Remove(name)
	return nil
}
