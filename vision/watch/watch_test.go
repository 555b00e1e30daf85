package watch

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"tilebench/games"
	_ "tilebench/games/all"
	"tilebench/internal/reftest"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/overlay"
)

// running is a viewer serving on a loopback port for one test.
type running struct {
	v     *Viewer
	url   string
	host  string
	steps atomic.Int64
	last  atomic.Value // latest *snapCopy
	stop  func() error
}

type snapCopy struct {
	Seed     uint64
	Step     int
	Severity float64
	Spec     string
	Paused   bool
}

func paddle(t testing.TB) (games.Game, *patch.Grid) {
	t.Helper()
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: 20})
	if err != nil {
		t.Fatal(err)
	}
	return g, grid
}

// start serves cfg (paddle with its expert unless set) on a free
// loopback port.
func start(t testing.TB, cfg Config) *running {
	t.Helper()
	if cfg.Game == nil {
		cfg.Game, cfg.Grid = paddle(t)
	}
	if cfg.Policy == nil {
		ex, _ := vision.NewExpertPolicy(cfg.Game)
		cfg.Policy = ex
	}
	r := &running{}
	user := cfg.OnStep
	cfg.OnStep = func(s *Snapshot) {
		r.steps.Add(1)
		r.last.Store(&snapCopy{Seed: s.Seed, Step: s.Step, Severity: s.Severity, Spec: s.Spec, Paused: s.Paused})
		if user != nil {
			user(s)
		}
	}
	v, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	ln, u, warn, err := Listen("")
	if err != nil {
		t.Fatal(err)
	}
	if warn != "" {
		t.Fatalf("loopback listen warned: %s", warn)
	}
	r.v, r.url = v, u
	pu, _ := url.Parse(u)
	r.host = pu.Host
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- v.Serve(ctx, ln) }()
	var once sync.Once
	var serr error
	r.stop = func() error {
		once.Do(func() {
			cancel()
			select {
			case serr = <-done:
			case <-time.After(10 * time.Second):
				serr = fmt.Errorf("viewer did not stop")
			}
		})
		return serr
	}
	t.Cleanup(func() { r.stop() })
	return r
}

func (r *running) waitSteps(t testing.TB, n int64, within time.Duration) {
	t.Helper()
	deadline := time.Now().Add(within)
	for r.steps.Load() < n {
		if time.Now().After(deadline) {
			t.Fatalf("only %d steps within %v, want %d", r.steps.Load(), within, n)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

func (r *running) control(t testing.TB, form url.Values) *http.Response {
	t.Helper()
	resp, err := http.PostForm(r.url+"control", form)
	if err != nil {
		t.Fatal(err)
	}
	io.Copy(io.Discard, resp.Body)
	resp.Body.Close()
	return resp
}

func TestListenDefaultsToLoopback(t *testing.T) {
	ln, u, warn, err := Listen("")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	if a := ln.Addr().(*net.TCPAddr); !a.IP.IsLoopback() || a.Port == 0 || warn != "" {
		t.Fatalf("bound %v (warning %q), want a loopback address on a free port", a, warn)
	}
	if !strings.HasPrefix(u, "http://127.0.0.1:") {
		t.Fatalf("URL %q", u)
	}
	// An explicit address that is not loopback comes with a warning.
	ln2, _, warn, err := Listen("0.0.0.0:0")
	if err != nil {
		t.Skipf("cannot listen on all interfaces: %v", err)
	}
	defer ln2.Close()
	if !strings.Contains(warn, "warning") {
		t.Fatalf("listening on all interfaces without a warning")
	}
	if _, _, _, err := Listen("nonsense"); err == nil {
		t.Fatal("a listen address without a port was accepted")
	}
}

// DNS-rebinding guard: a request naming another host, or coming from a
// page of another origin, is refused; the viewer's own names pass.
func TestGuardRefusesForeignHostAndOrigin(t *testing.T) {
	r := start(t, Config{})
	_, port, _ := net.SplitHostPort(r.host)
	cases := []struct {
		host, origin, site string
		method, path       string
		want               int
	}{
		{r.host, "", "", "GET", "/", 200},
		{"localhost:" + port, "", "", "GET", "/", 200},
		{"evil.example:" + port, "", "", "GET", "/", 403},
		{"evil.example", "", "", "GET", "/events", 403},
		{"127.0.0.1:1", "", "", "GET", "/", 403},
		{r.host, "http://evil.example:" + port, "", "GET", "/", 403},
		{r.host, "http://evil.example", "", "POST", "/control", 403},
		{r.host, "null", "", "POST", "/control", 403},
		{r.host, "", "cross-site", "POST", "/control", 403},
		{r.host, "http://" + r.host, "same-origin", "POST", "/control", 204},
	}
	for _, c := range cases {
		var body io.Reader
		if c.method == "POST" {
			body = strings.NewReader("op=resume")
		}
		req, _ := http.NewRequest(c.method, r.url[:len(r.url)-1]+c.path, body)
		req.Host = c.host
		if c.origin != "" {
			req.Header.Set("Origin", c.origin)
		}
		if c.site != "" {
			req.Header.Set("Sec-Fetch-Site", c.site)
		}
		if c.method == "POST" {
			req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != c.want {
			t.Errorf("%s %s Host %q Origin %q Sec-Fetch-Site %q: status %d, want %d", c.method, c.path, c.host, c.origin, c.site, resp.StatusCode, c.want)
		}
	}
}

// On a wildcard address (given explicitly) the machine's own addresses
// and a name allowed by AllowHost pass the guard; others do not.
func TestGuardOnWildcardAddress(t *testing.T) {
	g, grid := paddle(t)
	ex, _ := vision.NewExpertPolicy(g)
	v, err := New(Config{Game: g, Grid: grid, Policy: ex})
	if err != nil {
		t.Fatal(err)
	}
	ln, _, warn, err := Listen("0.0.0.0:0")
	if err != nil {
		t.Skipf("cannot listen on all interfaces: %v", err)
	}
	if warn == "" {
		t.Fatal("no warning for a wildcard address")
	}
	v.AllowHost("viewer.example:1234")
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- v.Serve(ctx, ln) }()
	defer func() { cancel(); <-done }()
	port := strconv.Itoa(ln.Addr().(*net.TCPAddr).Port)
	for host, want := range map[string]int{
		"127.0.0.1:" + port: 200, "localhost:" + port: 200, "viewer.example:1234": 200, "evil.example:" + port: 403,
	} {
		req, _ := http.NewRequest("GET", "http://127.0.0.1:"+port+"/", nil)
		req.Host = host
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != want {
			t.Errorf("Host %q: status %d, want %d", host, resp.StatusCode, want)
		}
	}
}

// Every user string on the page is escaped.
func TestPageEscapesUserStrings(t *testing.T) {
	g, grid := paddle(t)
	hostile := `</script><script>alert(1)</script>"'&<b>`
	r := start(t, Config{Game: g, Grid: grid, PolicyName: hostile})
	resp, err := http.Get(r.url)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	page := string(b)
	if strings.Contains(page, "<script>alert(1)") || strings.Contains(page, `"'&<b>`) {
		t.Fatalf("hostile policy name reached the page unescaped")
	}
	if !strings.Contains(page, "&lt;/script&gt;&lt;script&gt;alert(1)&lt;/script&gt;&#34;&#39;&amp;&lt;b&gt;") {
		t.Fatalf("policy name not shown escaped")
	}
	for _, ext := range []string{"src=\"http", "href=\"http", "url(http", "@import"} {
		if strings.Contains(page, ext) {
			t.Fatalf("page loads something from elsewhere (%q)", ext)
		}
	}
	if strings.Contains(page, "ZgotmplZ") {
		t.Fatal("the template refused a value (ZgotmplZ on the page)")
	}
	if csp := resp.Header.Get("Content-Security-Policy"); !strings.Contains(csp, "default-src 'none'") {
		t.Fatalf("no content security policy: %q", csp)
	}
}

// readEvent reads one server-sent event from br.
func readEvent(br *bufio.Reader) (map[string]any, error) {
	for {
		line, err := br.ReadString('\n')
		if err != nil {
			return nil, err
		}
		if data, ok := strings.CutPrefix(line, "data: "); ok {
			var m map[string]any
			if err := json.Unmarshal([]byte(data), &m); err != nil {
				return nil, err
			}
			return m, nil
		}
	}
}

// Browsers that come and go neither stop the game loop nor leave
// goroutines behind.
func TestReconnectKeepsLoopAndLeaksNothing(t *testing.T) {
	r := start(t, Config{FPS: 60})
	r.waitSteps(t, 3, 5*time.Second)
	base := runtime.NumGoroutine()
	for i := 0; i < 20; i++ {
		req, _ := http.NewRequest("GET", r.url+"events", nil)
		ctx, cancel := context.WithCancel(context.Background())
		resp, err := http.DefaultClient.Do(req.WithContext(ctx))
		if err != nil {
			t.Fatal(err)
		}
		ev, err := readEvent(bufio.NewReader(resp.Body))
		if err != nil {
			t.Fatalf("connection %d: %v", i, err)
		}
		if ev["format"] != float64(1) || len(ev["images"].([]any)) != 4 {
			t.Fatalf("event %v", ev)
		}
		cancel()
		resp.Body.Close()
	}
	http.DefaultClient.CloseIdleConnections()
	before := r.steps.Load()
	r.waitSteps(t, before+10, 5*time.Second)
	deadline := time.Now().Add(5 * time.Second)
	for {
		n := runtime.NumGoroutine()
		if n <= base+1 && r.v.hub.count() == 0 {
			break
		}
		if time.Now().After(deadline) {
			buf := make([]byte, 1<<16)
			t.Fatalf("%d goroutines after 20 reconnects, %d before; %d browsers registered\n%s", n, base, r.v.hub.count(), buf[:runtime.Stack(buf, true)])
		}
		time.Sleep(20 * time.Millisecond)
	}
	if err := r.stop(); err != nil {
		t.Fatal(err)
	}
}

// A browser that stops reading does not slow the game loop, and its
// mailbox never holds more than one frame. The rate with a stalled
// browser is compared with the rate with a reading one, in the same run
// (encoding frames is what sets the pace, and it is much slower under
// the race detector).
func TestSlowBrowserDropsFrames(t *testing.T) {
	r := start(t, Config{FPS: 20})
	resp, err := http.Get(r.url + "events")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	go io.Copy(io.Discard, resp.Body)
	rate := func() float64 {
		s0, t0 := r.steps.Load(), time.Now()
		time.Sleep(1500 * time.Millisecond)
		return float64(r.steps.Load()-s0) / time.Since(t0).Seconds()
	}
	r.waitSteps(t, 2, 5*time.Second)
	reading := rate()
	conn, err := net.Dial("tcp", r.host)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	fmt.Fprintf(conn, "GET /events HTTP/1.1\r\nHost: %s\r\n\r\n", r.host)
	// Never read. Frames are ~10–40 kB; a few seconds of them fill the
	// socket buffers, after which the handler blocks on its write.
	deadline := time.Now().Add(5 * time.Second)
	for r.v.hub.count() < 2 && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	if r.v.hub.count() != 2 {
		t.Fatal("the stalled browser never registered")
	}
	time.Sleep(2 * time.Second)
	stalled := rate()
	t.Logf("%.1f steps/s with a reading browser, %.1f with a stalled one added (20 asked)", reading, stalled)
	if stalled < 0.5*reading && !raceOn {
		t.Fatalf("game loop slowed from %.1f to %.1f steps/s by a browser that does not read", reading, stalled)
	}
	r.v.hub.mu.Lock()
	for s := range r.v.hub.subs {
		if len(s.ch) > 1 {
			t.Errorf("mailbox holds %d frames", len(s.ch))
		}
	}
	r.v.hub.mu.Unlock()
	if err := r.stop(); err != nil {
		t.Fatal(err)
	}
}

// Publishing never waits for a browser: with a mailbox nobody empties,
// a thousand frames go out at once and the mailbox holds the newest.
func TestPublishNeverBlocks(t *testing.T) {
	var h hub
	h.init(2)
	stuck, _ := h.join()
	start := time.Now()
	for i := 0; i < 1000; i++ {
		h.publish([]byte{byte(i)})
	}
	if el := time.Since(start); el > time.Second {
		t.Fatalf("1000 publishes took %v", el)
	}
	if len(stuck.ch) != 1 || (<-stuck.ch)[0] != byte(999%256) {
		t.Fatal("the mailbox does not hold just the newest frame")
	}
	if _, ok := h.join(); !ok {
		t.Fatal("second browser refused")
	}
	if _, ok := h.join(); ok {
		t.Fatal("a third browser was let in beyond the limit of 2")
	}
}

func TestControls(t *testing.T) {
	g, _ := games.Build("paddle", games.Setup{})
	sp := g.Spec()
	grid, _ := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: 12})
	r := start(t, Config{Game: g, Grid: grid, FPS: 50, Seed: 5, Spec: patch.Spec{Occlude: "block:0.2"}})
	r.waitSteps(t, 3, 5*time.Second)
	if resp := r.control(t, url.Values{"op": {"pause"}}); resp.StatusCode != 204 {
		t.Fatalf("pause: %d", resp.StatusCode)
	}
	time.Sleep(200 * time.Millisecond)
	n := r.steps.Load()
	time.Sleep(300 * time.Millisecond)
	if got := r.steps.Load(); got != n {
		t.Fatalf("%d steps while paused", got-n)
	}
	r.control(t, url.Values{"op": {"step"}})
	r.waitSteps(t, n+1, 2*time.Second)
	time.Sleep(200 * time.Millisecond)
	if got := r.steps.Load(); got != n+1 {
		t.Fatalf("one step asked, %d made", got-n)
	}
	r.control(t, url.Values{"op": {"severity"}, "value": {"0.6"}})
	r.control(t, url.Values{"op": {"seed"}, "value": {"77"}})
	r.control(t, url.Values{"op": {"step"}})
	r.waitSteps(t, n+2, 2*time.Second)
	last := r.last.Load().(*snapCopy)
	if last.Seed != 77 || last.Step != 0 || last.Severity != 0.6 || !strings.Contains(last.Spec, "block:0.6") || !last.Paused {
		t.Fatalf("after seed 77 and severity 0.6: %+v", last)
	}
	for _, bad := range []url.Values{{"op": {"severity"}, "value": {"2"}}, {"op": {"severity"}, "value": {"NaN"}},
		{"op": {"seed"}, "value": {"-1"}}, {"op": {"launch"}}} {
		if resp := r.control(t, bad); resp.StatusCode != 400 {
			t.Errorf("control %v: status %d, want 400", bad, resp.StatusCode)
		}
	}
	r.control(t, url.Values{"op": {"resume"}})
	r.waitSteps(t, n+10, 3*time.Second)
}

func TestSeverityOf(t *testing.T) {
	for occ, want := range map[string]string{
		"": "random:0.5", "none": "random:0.5", "random:0.3": "random:0.5", "bands:0.2:h": "bands:0.5:h",
		"sweep:0.1:4": "sweep:0.5:4", "mask:a.png": "mask:a.png",
	} {
		if got := withSeverity(occ, 0.5); got != want {
			t.Errorf("withSeverity(%q, 0.5) = %q, want %q", occ, got, want)
		}
	}
	if got := withSeverity("block:0.3", 0); got != "none" {
		t.Errorf("severity 0 gives %q", got)
	}
}

// loadShipped loads a policy shipped in testdata/policies.
func loadShipped(t testing.TB, name string) nets.Net {
	t.Helper()
	n, err := nets.Load(filepath.Join(reftest.Root(), "testdata", "policies", name))
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// An invariant policy attends to the same content however the tokens are
// ordered: mapped back onto the game frame, its overlay is the same with
// and without scrambling.
func TestInvariantOverlaySurvivesScrambling(t *testing.T) {
	for _, name := range []string{"paddle-attention-p10.safetensors", "drive-attention-p8.safetensors"} {
		net := loadShipped(t, name)
		gname := strings.Split(name, "-")[0]
		var cells [2][]float32
		var heat [2][]byte
		for i, spec := range []patch.Spec{{}, {Scramble: "full", Every: 1}} {
			g, err := games.Build(gname, games.Setup{})
			if err != nil {
				t.Fatal(err)
			}
			l, err := newLoop(&Config{Game: g, Grid: net.Grid(), Policy: net, Spec: spec, Overlay: defaultOverlay})
			if err != nil {
				t.Fatal(err)
			}
			l.begin(games.HeldOut(2))
			for k := 0; k < 5; k++ {
				if err := l.step(); err != nil {
					t.Fatal(err)
				}
			}
			if !l.snap.HasWeights {
				t.Fatalf("%s: no weights", name)
			}
			cells[i] = append([]float32(nil), l.snap.RawCells...)
			heat[i] = append([]byte(nil), l.snap.RawHeat.Pix...)
			if i == 1 && samePix(l.snap.Seen.Pix, l.snap.Raw.Pix) {
				t.Fatalf("%s: the scrambled frame equals the game frame", name)
			}
		}
		var sum float64
		for c := range cells[0] {
			sum += float64(cells[0][c])
			if d := math.Abs(float64(cells[0][c] - cells[1][c])); d > 1e-4 {
				t.Fatalf("%s: cell %d weighs %v unscrambled, %v scrambled", name, c, cells[0][c], cells[1][c])
			}
		}
		if sum < 1 {
			t.Fatalf("%s: weights sum to %v", name, sum)
		}
		worst := 0
		for i := range heat[0] {
			d := int(heat[0][i]) - int(heat[1][i])
			worst = max(worst, d, -d)
		}
		if worst > 1 {
			t.Fatalf("%s: overlay on the game frame differs by %d levels with scrambling", name, worst)
		}
	}
}

func samePix(a, b []byte) bool { return string(a) == string(b) }

// The viewer holds 20 frames a second on drive with the shipped p8
// policy, with a browser attached, using under one core. A timing test:
// it runs with TILEBENCH_SPEED=1 (on a machine that is not saturated), as
// the project's other speed checks do.
func TestSpeedDriveP8(t *testing.T) {
	if os.Getenv("TILEBENCH_SPEED") != "1" {
		t.Skip("timing test: TILEBENCH_SPEED=1")
	}
	net := loadShipped(t, "drive-attention-p8.safetensors")
	g, err := games.Build("drive", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	r := start(t, Config{Game: g, Grid: net.Grid(), Policy: net, FPS: 20, Spec: patch.Spec{Occlude: "random:0.3"}})
	resp, err := http.Get(r.url + "events")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var events atomic.Int64
	go func() {
		br := bufio.NewReader(resp.Body)
		for {
			if _, err := readEvent(br); err != nil {
				return
			}
			events.Add(1)
		}
	}()
	r.waitSteps(t, 2, 5*time.Second)
	s0, e0, c0, t0 := r.steps.Load(), events.Load(), cpuTime(), time.Now()
	time.Sleep(3 * time.Second)
	wall := time.Since(t0).Seconds()
	steps, evs, cpu := float64(r.steps.Load()-s0)/wall, float64(events.Load()-e0)/wall, (cpuTime()-c0).Seconds()/wall
	t.Logf("drive p8: %.1f steps/s, %.1f events/s received, %.2f cores (process, test client included)", steps, evs, cpu)
	if steps < 18 || evs < 15 {
		t.Fatalf("%.1f steps/s and %.1f events/s, want 20", steps, evs)
	}
	if cpu >= 1 {
		t.Fatalf("%.2f cores, want under one", cpu)
	}
}

var defaultOverlay = overlay.Spec{Heat: true, Top: 3}

// cpuTime is the CPU time (user and system) this process has used.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
