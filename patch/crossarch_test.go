package patch

import (
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// TestCrossArchDeterminism builds this package's tests for 386 and arm64
// (where Go may fuse multiply-adds) and runs the determinism pin and the
// NumPy golden check there: 386 natively, arm64 under qemu-aarch64
// (Debian's qemu-user). Slow, so it runs only with
// TILEBENCH_CROSS_ARCH=1.
func TestCrossArchDeterminism(t *testing.T) {
	if os.Getenv("TILEBENCH_CROSS_ARCH") != "1" {
		t.Skip("set TILEBENCH_CROSS_ARCH=1 to run the pin on 386 and arm64")
	}
	for _, arch := range []string{"386", "arm64"} {
		bin := filepath.Join(t.TempDir(), "patch-"+arch+".test")
		build := exec.Command("go", "test", "-c", "-o", bin, ".")
		build.Env = append(os.Environ(), "GOARCH="+arch, "CGO_ENABLED=0")
		if out, err := build.CombinedOutput(); err != nil {
			t.Fatalf("build for %s: %v\n%s", arch, err, out)
		}
		run := []string{bin}
		if arch == "arm64" {
			q, err := exec.LookPath("qemu-aarch64")
			if err != nil {
				t.Fatal("qemu-aarch64 not found (apt-get install qemu-user)")
			}
			run = []string{q, bin}
		}
		cmd := exec.Command(run[0], append(run[1:], "-test.run", "^(TestDeterminismPin|TestTokenizeGolden|TestUnscrambleRoundTrip)$")...)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("%s: %v\n%s", arch, err, out)
		}
	}
}
