package probe

import (
	"bytes"
	"context"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tilebench/internal/reftest"
	"tilebench/vision/report"
	"tilebench/vision/study"
)

// chromium is Debian's headless browser (as in vision/report's tests).
const chromium = "/usr/bin/chromium"

// TestRefChromium renders a probe's report.html in headless Chromium with
// the network cut off: no console messages, and a screenshot that is not
// blank. It also checks the page carries the caution and the strips.
func TestRefChromium(t *testing.T) {
	if _, err := os.Stat(chromium); err != nil {
		if reftest.Required() {
			t.Fatalf("%s not found (TILEBENCH_REQUIRE_REF=1)", chromium)
		}
		t.Skipf("skipping: %s not found", chromium)
	}
	dir := t.TempDir()
	rec := recording(t, dir, 30, 48, 40)
	acts := filepath.Join(dir, "a.npy")
	writeNPY(t, acts, 30, 2, false, func(i, j int) float64 { return 0.1 * float64(j) })
	eps := filepath.Join(dir, "e.csv")
	os.WriteFile(eps, []byte("0\n15\n"), 0o644)
	p := plan(t, Config{In: rec, Episodes: eps, Actions: acts, Policy: "fresh", Family: "posattention", ActionSpace: "continuous:2",
		Axes: study.Axes{Occlude: study.Axis{"random:0:0.6:0.2,block:0.4"}, Scramble: study.Axis{"none,full"}}, Resamples: 200})
	out := filepath.Join(dir, "out")
	runProbe(t, p, Options{Dir: out, Workers: 2})
	page := filepath.Join(out, report.HTMLFile)
	html := read(t, page)
	for _, want := range []string{report.Caution, "What the policy saw", "Drift against occlusion (", "Where it breaks", "sequences"} {
		if !bytes.Contains(html, []byte(want)) {
			t.Errorf("report.html lacks %q", want)
		}
	}
	shot := filepath.Join(dir, "shot.png")
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, chromium, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--host-resolver-rules=MAP * ~NOTFOUND", "--user-data-dir="+t.TempDir(),
		"--screenshot="+shot, "--window-size=1280,2000", "--enable-logging=stderr", "--v=0", "file://"+page)
	var stderr bytes.Buffer
	cmd.Stderr, cmd.Stdout = &stderr, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("chromium: %v\n%s", err, stderr.String())
	}
	for _, l := range strings.Split(stderr.String(), "\n") {
		if strings.Contains(l, ":CONSOLE") {
			t.Errorf("console message: %s", l)
		}
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v", err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	colours := map[uint32]bool{}
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y += 3 {
		for x := b.Min.X; x < b.Max.X; x += 3 {
			r, g, bl, _ := img.At(x, y).RGBA()
			colours[(r>>8)<<16|(g>>8)<<8|bl>>8] = true
		}
	}
	if len(colours) < 50 {
		t.Errorf("screenshot has only %d colours: blank page?", len(colours))
	}
}
