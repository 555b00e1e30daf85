package report

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
)

// Chromium is Debian's headless browser, used to check that report.html
// renders.
const Chromium = "/usr/bin/chromium"

// renderChromium opens page in headless Chromium, saves a screenshot at
// shot and returns the console messages it logged. Network access is cut
// off (every host resolves to nothing), so the page must stand alone.
func renderChromium(t *testing.T, page, shot string) []string {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, Chromium,
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--host-resolver-rules=MAP * ~NOTFOUND",
		"--user-data-dir="+t.TempDir(),
		"--screenshot="+shot, "--window-size=1280,2000",
		"--enable-logging=stderr", "--v=0",
		"file://"+page)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	cmd.Stdout = &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("chromium: %v\n%s", err, stderr.String())
	}
	// Chromium logs every console message (errors, warnings, uncaught
	// exceptions) as an INFO:CONSOLE line; the report has no script, so
	// any such line is a fault.
	var console []string
	for _, l := range strings.Split(stderr.String(), "\n") {
		if strings.Contains(l, ":CONSOLE") {
			console = append(console, l)
		}
	}
	return console
}

func needChromium(t *testing.T) {
	t.Helper()
	if _, err := os.Stat(Chromium); err != nil {
		if reftest.Required() {
			t.Fatalf("%s not found (TILEBENCH_REQUIRE_REF=1)", Chromium)
		}
		t.Skipf("skipping: %s not found", Chromium)
	}
}

// TestRefChromium renders the example report in headless Chromium: no
// console messages, and a screenshot that is neither blank nor a single
// colour. The screenshot is kept (path logged).
func TestRefChromium(t *testing.T) {
	needChromium(t)
	dir, _ := writeDemo(t)
	art := artifactDir(t)
	shot := filepath.Join(art, "report-screenshot.png")
	console := renderChromium(t, filepath.Join(dir, HTMLFile), shot)
	if len(console) > 0 {
		t.Errorf("console messages while rendering report.html:\n%s", strings.Join(console, "\n"))
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v", err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}
	b := img.Bounds()
	colours := map[uint32]int{}
	white := 0
	for y := b.Min.Y; y < b.Max.Y; y += 2 {
		for x := b.Min.X; x < b.Max.X; x += 2 {
			r, g, bl, _ := img.At(x, y).RGBA()
			colours[(r>>8)<<16|(g>>8)<<8|bl>>8]++
			if r>>8 > 250 && g>>8 > 250 && bl>>8 > 250 {
				white++
			}
		}
	}
	total := (b.Dx() / 2) * (b.Dy() / 2)
	t.Logf("screenshot %s: %dx%d, %d colours, %.0f%% white", shot, b.Dx(), b.Dy(), len(colours), 100*float64(white)/float64(total))
	if len(colours) < 50 {
		t.Errorf("screenshot has only %d colours: blank page?", len(colours))
	}
	if white > total*9/10 {
		t.Errorf("screenshot is %d%% white", 100*white/total)
	}
}

// The hostile report (every user string an attack) renders without any
// injected script running.
func TestRefChromiumHostile(t *testing.T) {
	needChromium(t)
	dir := t.TempDir()
	if err := Write(dir, hostileData()); err != nil {
		t.Fatal(err)
	}
	shot := filepath.Join(artifactDir(t), "report-hostile-screenshot.png")
	if console := renderChromium(t, filepath.Join(dir, HTMLFile), shot); len(console) > 0 {
		t.Errorf("console messages while rendering the hostile report:\n%s", strings.Join(console, "\n"))
	}
}

// The console check can fail: a page with a script error is caught.
func TestRefChromiumCatchesErrors(t *testing.T) {
	needChromium(t)
	dir := t.TempDir()
	page := filepath.Join(dir, "bad.html")
	if err := os.WriteFile(page, []byte(`<!doctype html><title>x</title><script>notDefined()</script>`), 0o644); err != nil {
		t.Fatal(err)
	}
	if got := renderChromium(t, page, filepath.Join(dir, "bad.png")); len(got) == 0 {
		t.Fatal("a script error went unnoticed")
	}
}
