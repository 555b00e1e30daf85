package watch

import (
	"bufio"
	"bytes"
	"encoding/base64"
	"encoding/json"
	"fmt"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"tilebench/games"
	"tilebench/internal/reftest"
	"tilebench/patch"
)

// chromium is Debian's headless browser (as the report's tests use it).
const chromium = "/usr/bin/chromium"

// browser drives headless Chromium over the DevTools protocol on a pipe
// (--remote-debugging-pipe: commands on fd 3, replies on fd 4, each
// message JSON ended by a NUL byte), which needs no WebSocket.
type browser struct {
	cmd     *exec.Cmd
	w       *os.File
	r       *bufio.Reader
	id      int
	session string
	errors  []string // exceptions and console errors seen
}

func startBrowser(t *testing.T) *browser {
	t.Helper()
	if _, err := os.Stat(chromium); err != nil {
		if reftest.Required() {
			t.Fatalf("%s not found (TILEBENCH_REQUIRE_REF=1)", chromium)
		}
		t.Skipf("skipping: %s not found", chromium)
	}
	inR, inW, err := os.Pipe() // commands: we write inW, Chromium reads fd 3
	if err != nil {
		t.Fatal(err)
	}
	outR, outW, err := os.Pipe() // replies: Chromium writes fd 4
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(chromium, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1", "--user-data-dir="+t.TempDir(),
		"--window-size=1280,860", "--hide-scrollbars", "--remote-debugging-pipe", "about:blank")
	cmd.ExtraFiles = []*os.File{inR, outW}
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatalf("chromium: %v", err)
	}
	inR.Close()
	outW.Close()
	b := &browser{cmd: cmd, w: inW, r: bufio.NewReaderSize(outR, 1<<20)}
	t.Cleanup(func() {
		b.call("Browser.close", nil, false)
		done := make(chan struct{})
		go func() { cmd.Wait(); close(done) }()
		select {
		case <-done:
		case <-time.After(5 * time.Second):
			cmd.Process.Kill()
			<-done
		}
		inW.Close()
		outR.Close()
	})
	return b
}

// call sends one command (to the attached page when onPage) and returns
// its result, noting exceptions the page reports meanwhile.
func (b *browser) call(method string, params any, onPage bool) (json.RawMessage, error) {
	b.id++
	msg := map[string]any{"id": b.id, "method": method}
	if params != nil {
		msg["params"] = params
	}
	if onPage {
		msg["sessionId"] = b.session
	}
	js, _ := json.Marshal(msg)
	if _, err := b.w.Write(append(js, 0)); err != nil {
		return nil, err
	}
	for {
		raw, err := b.r.ReadBytes(0)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", method, err)
		}
		var reply struct {
			ID     int             `json:"id"`
			Method string          `json:"method"`
			Params json.RawMessage `json:"params"`
			Result json.RawMessage `json:"result"`
			Error  *struct {
				Message string `json:"message"`
			} `json:"error"`
		}
		if err := json.Unmarshal(raw[:len(raw)-1], &reply); err != nil {
			return nil, err
		}
		switch reply.Method {
		case "Runtime.exceptionThrown":
			b.errors = append(b.errors, string(reply.Params))
		case "Runtime.consoleAPICalled":
			if strings.Contains(string(reply.Params), `"type":"error"`) {
				b.errors = append(b.errors, string(reply.Params))
			}
		}
		if reply.ID != b.id {
			continue
		}
		if reply.Error != nil {
			return nil, fmt.Errorf("%s: %s", method, reply.Error.Message)
		}
		return reply.Result, nil
	}
}

// open attaches to the browser's page and navigates to url.
func (b *browser) open(t *testing.T, url string) {
	t.Helper()
	res, err := b.call("Target.createTarget", map[string]any{"url": "about:blank"}, false)
	if err != nil {
		t.Fatal(err)
	}
	var tg struct {
		TargetID string `json:"targetId"`
	}
	json.Unmarshal(res, &tg)
	res, err = b.call("Target.attachToTarget", map[string]any{"targetId": tg.TargetID, "flatten": true}, false)
	if err != nil {
		t.Fatal(err)
	}
	var at struct {
		SessionID string `json:"sessionId"`
	}
	json.Unmarshal(res, &at)
	b.session = at.SessionID
	for _, m := range []string{"Runtime.enable", "Page.enable"} {
		if _, err := b.call(m, nil, true); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := b.call("Page.navigate", map[string]any{"url": url}, true); err != nil {
		t.Fatal(err)
	}
}

// eval evaluates a JavaScript expression on the page and returns its
// value as a string.
func (b *browser) eval(t *testing.T, expr string) string {
	t.Helper()
	res, err := b.call("Runtime.evaluate", map[string]any{"expression": expr, "returnByValue": true}, true)
	if err != nil {
		t.Fatal(err)
	}
	var r struct {
		Result struct {
			Value any `json:"value"`
		} `json:"result"`
	}
	json.Unmarshal(res, &r)
	if r.Result.Value == nil {
		return ""
	}
	return fmt.Sprint(r.Result.Value)
}

// waitFor polls expr until it returns want (or, want "", anything
// accepted by ok).
func (b *browser) waitFor(t *testing.T, expr string, ok func(string) bool, what string) string {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for {
		v := b.eval(t, expr)
		if ok(v) {
			return v
		}
		if time.Now().After(deadline) {
			t.Fatalf("waiting for %s: %s is %q", what, expr, v)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

func (b *browser) screenshot(t *testing.T) image.Image {
	t.Helper()
	res, err := b.call("Page.captureScreenshot", map[string]any{"format": "png"}, true)
	if err != nil {
		t.Fatal(err)
	}
	var r struct {
		Data string `json:"data"`
	}
	json.Unmarshal(res, &r)
	raw, err := base64.StdEncoding.DecodeString(r.Data)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(raw))
	if err != nil {
		t.Fatal(err)
	}
	return img
}

// rectOf returns the page rectangle of the element with id, in screenshot
// pixels.
func (b *browser) rectOf(t *testing.T, id string) image.Rectangle {
	t.Helper()
	v := b.eval(t, `(() => { const r = document.getElementById("`+id+`").getBoundingClientRect(); const s = window.devicePixelRatio; return [r.left*s, r.top*s, r.right*s, r.bottom*s].map(Math.round).join(","); })()`)
	var x0, y0, x1, y1 int
	if _, err := fmt.Sscanf(v, "%d,%d,%d,%d", &x0, &y0, &x1, &y1); err != nil {
		t.Fatalf("rect of %s: %q", id, v)
	}
	return image.Rect(x0, y0, x1, y1)
}

// colours counts the distinct colours in r of img (every other pixel).
func colours(img image.Image, r image.Rectangle) (n int, whiteShare float64) {
	seen := map[uint32]bool{}
	white, total := 0, 0
	for y := r.Min.Y; y < r.Max.Y; y += 2 {
		for x := r.Min.X; x < r.Max.X; x += 2 {
			cr, cg, cb, _ := img.At(x, y).RGBA()
			seen[(cr>>8)<<16|(cg>>8)<<8|cb>>8] = true
			if cr>>8 > 245 && cg>>8 > 245 && cb>>8 > 245 {
				white++
			}
			total++
		}
	}
	return len(seen), float64(white) / float64(max(total, 1))
}

func sameRegion(a, b image.Image, r image.Rectangle) bool {
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			if a.At(x, y) != b.At(x, y) {
				return false
			}
		}
	}
	return true
}

// TestRefBrowser serves the viewer on loopback, opens it in headless
// Chromium, waits until frames arrive, moves the severity control and
// checks by screenshot that the page is not blank and that the severity
// shown changed. With TILEBENCH_WRITE_SCREENSHOT=1 the screenshot
// replaces docs/watch.png (the README's).
func TestRefBrowser(t *testing.T) {
	b := startBrowser(t)
	net := loadShipped(t, "drive-attention-p8.safetensors")
	g, err := games.Build("drive", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	r := start(t, Config{Game: g, Grid: net.Grid(), Policy: net, PolicyName: "drive-attention-p8.safetensors",
		Seed: games.HeldOut(1), Spec: patch.Spec{Occlude: "random:0.3"}})
	b.open(t, r.url)
	b.waitFor(t, `document.getElementById("stepn").textContent`, func(v string) bool {
		n, err := strconv.Atoi(v)
		return err == nil && n >= 5
	}, "frames")
	b.waitFor(t, `document.getElementById("rawheat").naturalWidth`, func(v string) bool { return v != "" && v != "0" }, "the overlay image")
	if got := b.eval(t, `document.getElementById("severity").textContent`); got != "0.30" {
		t.Fatalf("severity shown %q, want 0.30", got)
	}
	sevRect := b.rectOf(t, "severity")
	before := b.screenshot(t)
	// Move the page's own control, as a user would.
	b.eval(t, `(() => { const s = document.getElementById("sevin"); s.value = "0.7"; s.dispatchEvent(new Event("input")); s.dispatchEvent(new Event("change")); return true; })()`)
	b.waitFor(t, `document.getElementById("severity").textContent`, func(v string) bool { return v == "0.70" }, "the new severity")
	b.waitFor(t, `document.getElementById("spec").textContent`, func(v string) bool { return strings.Contains(v, "random:0.7") }, "the new spec")
	time.Sleep(300 * time.Millisecond)
	after := b.screenshot(t)
	full := after.Bounds()
	n, white := colours(after, full)
	t.Logf("screenshot %dx%d: %d colours, %.0f%% white", full.Dx(), full.Dy(), n, 100*white)
	if n < 50 || white > 0.9 {
		t.Fatalf("page looks blank: %d colours, %.0f%% white", n, 100*white)
	}
	if sameRegion(before, after, sevRect) {
		t.Fatalf("the severity shown at %v did not change on screen", sevRect)
	}
	if fr := b.rectOf(t, "rawheat"); func() bool { c, _ := colours(after, fr); return c < 10 }() {
		t.Fatalf("the overlay panel at %v is flat", fr)
	}
	if len(b.errors) > 0 {
		t.Fatalf("page errors:\n%s", strings.Join(b.errors, "\n"))
	}
	shot := filepath.Join(t.TempDir(), "watch.png")
	if os.Getenv("TILEBENCH_WRITE_SCREENSHOT") == "1" {
		shot = filepath.Join(reftest.Root(), "docs", "watch.png")
	}
	f, err := os.Create(shot)
	if err != nil {
		t.Fatal(err)
	}
	if err := png.Encode(f, after); err != nil {
		t.Fatal(err)
	}
	f.Close()
	t.Logf("screenshot kept at %s", shot)
}

// A hostile policy name is shown as text in a real browser: no markup it
// holds runs.
func TestRefBrowserHostileName(t *testing.T) {
	b := startBrowser(t)
	hostile := `<img src=x onerror="window.pwned=1"><script>window.pwned=2</script>`
	r := start(t, Config{PolicyName: hostile, Spec: patch.Spec{Scramble: "full"}})
	b.open(t, r.url)
	b.waitFor(t, `document.getElementById("stepn").textContent`, func(v string) bool {
		n, err := strconv.Atoi(v)
		return err == nil && n >= 1
	}, "frames")
	if got := b.eval(t, `document.getElementById("policy").textContent`); got != hostile {
		t.Fatalf("policy shown as %q", got)
	}
	if got := b.eval(t, `String(window.pwned)`); got != "undefined" {
		t.Fatalf("injected markup ran: window.pwned = %s", got)
	}
	if got := b.eval(t, `document.getElementById("noweights").hidden ? "hidden" : "shown"`); got != "shown" {
		t.Fatalf("the expert gives no weights, but the page does not say so (%s)", got)
	}
}
