// Package watch is a live local viewer: it plays a game with a policy
// step by step and serves one self-contained web page that shows the game
// frame, the frame as the policy saw it, where the policy's attention went
// (vision/overlay), the action and the running return, with controls to
// pause, step, change the seed and change the stress severity while it
// runs.
//
// The page is served by net/http and kept up to date with server-sent
// events. The server binds the loopback interface unless told otherwise,
// refuses requests whose Host or Origin header names another site (a
// guard against DNS rebinding), and never blocks the game loop on a
// browser: a slow browser misses frames instead of queueing them.
package watch

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net"
	"net/http"
	"strconv"
	"strings"
	"sync"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/overlay"
)

// Config sets up a viewer. Game, Grid and Policy are required; every other
// zero field takes the default documented on it.
type Config struct {
	// Game is the game to play (the viewer resets and steps it).
	Game games.Game
	// Grid is the geometry frames are cut on (the policy's grid).
	Grid *patch.Grid
	// Policy acts at every step. Its weights are drawn when it is a
	// vision.AttentionReporter.
	Policy vision.Policy
	// PolicyName labels the policy on the page (escaped). Default the
	// policy's Info().Label.
	PolicyName string
	// Spec is the transform pipeline. Its occlusion ratio is the
	// severity the page can change; with no occlusion the page's
	// severity control adds random occlusion.
	Spec patch.Spec
	// Seed is the first episode's game seed; later episodes count up.
	// The pipeline and policy seeds derive from it. Default 0.
	Seed uint64
	// FPS is the steps per second, 1 to 60. Default 20.
	FPS float64
	// Overlay is what the attention panels draw. Default attention+top:3.
	Overlay overlay.Spec
	// MaxClients bounds the browsers connected at once. Default 8.
	MaxClients int
	// OnStep, if set, is called by the game loop after every step with
	// the step's snapshot (valid until it returns). For tests.
	OnStep func(*Snapshot)
}

// Viewer is a running viewer: the game loop and its page.
type Viewer struct {
	cfg  Config
	hub  hub
	cmds chan command
	loop *loop
	done chan struct{}

	mu     sync.Mutex
	hosts  map[string]bool // Host header values accepted
	addr   string
	server *http.Server
}

// New checks cfg and prepares a viewer; Serve runs it.
func New(cfg Config) (*Viewer, error) {
	switch {
	case cfg.Game == nil:
		return nil, errors.New("watch: no game")
	case cfg.Grid == nil:
		return nil, errors.New("watch: no patch grid")
	case cfg.Policy == nil:
		return nil, errors.New("watch: no policy")
	}
	if cfg.FPS == 0 {
		cfg.FPS = 20
	}
	if !(cfg.FPS >= 1 && cfg.FPS <= 60) {
		return nil, fmt.Errorf("watch: %v frames a second: want 1 to 60", cfg.FPS)
	}
	if !cfg.Overlay.On() {
		cfg.Overlay = overlay.Spec{Heat: true, Top: 3}
	}
	if cfg.MaxClients <= 0 {
		cfg.MaxClients = 8
	}
	if cfg.PolicyName == "" {
		cfg.PolicyName = cfg.Policy.Info().Label
	}
	l, err := newLoop(&cfg)
	if err != nil {
		return nil, err
	}
	v := &Viewer{cfg: cfg, cmds: make(chan command, 16), loop: l, done: make(chan struct{})}
	v.hub.init(cfg.MaxClients)
	return v, nil
}

// Listen opens the viewer's address. addr "" means 127.0.0.1 on a free
// port. It returns the page's URL and, when the address is not a
// loopback one, a warning to show the user.
func Listen(addr string) (net.Listener, string, string, error) {
	if addr == "" {
		addr = "127.0.0.1:0"
	}
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return nil, "", "", fmt.Errorf("listen %q: want HOST:PORT: %w", addr, err)
	}
	ln, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, "", "", fmt.Errorf("listen: %w", err)
	}
	var warning string
	if !isLoopback(host) {
		warning = fmt.Sprintf("warning: the viewer listens on %s, not only on this machine: anyone who can reach that address can watch and control it", ln.Addr())
	}
	return ln, "http://" + urlHost(host, ln.Addr()) + "/", warning, nil
}

// isLoopback reports whether host names only this machine.
func isLoopback(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// urlHost is HOST:PORT for the URL: the host as given (the bound one
// when none or a wildcard was given) with the bound port.
func urlHost(host string, bound net.Addr) string {
	tcp, _ := bound.(*net.TCPAddr)
	port := "0"
	if tcp != nil {
		port = strconv.Itoa(tcp.Port)
	}
	if host == "" || host == "0.0.0.0" || host == "::" {
		if tcp != nil && !tcp.IP.IsUnspecified() {
			host = tcp.IP.String()
		} else {
			host = "127.0.0.1"
		}
	}
	return net.JoinHostPort(host, port)
}

// Serve runs the game loop and serves the page on ln until ctx is done,
// then stops both and returns. It returns the first error of the game
// loop (a policy fault, say) or of the server.
func (v *Viewer) Serve(ctx context.Context, ln net.Listener) error {
	v.mu.Lock()
	if v.hosts == nil {
		v.hosts = map[string]bool{}
	}
	for h := range allowedHosts(ln.Addr()) {
		v.hosts[h] = true
	}
	v.addr = ln.Addr().String()
	v.server = &http.Server{Handler: v.Handler(), ReadHeaderTimeout: 5 * time.Second}
	srv := v.server
	v.mu.Unlock()
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	errs := make(chan error, 2)
	go func() {
		err := srv.Serve(ln)
		if errors.Is(err, http.ErrServerClosed) {
			err = nil
		}
		cancel()
		errs <- err
	}()
	loopErr := v.loop.run(ctx, v.cmds, &v.hub)
	cancel()
	close(v.done) // event streams end
	sctx, scancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer scancel()
	if srv.Shutdown(sctx) != nil {
		srv.Close() // a browser that does not read: cut it off
	}
	srvErr := <-errs
	if loopErr != nil && !errors.Is(loopErr, context.Canceled) {
		return loopErr
	}
	return srvErr
}

// allowedHosts lists the Host header values that name the bound address:
// its IP and port, for loopback also localhost, and for a wildcard
// address every address of this machine's interfaces.
func allowedHosts(a net.Addr) map[string]bool {
	h := map[string]bool{}
	tcp, ok := a.(*net.TCPAddr)
	if !ok {
		h[a.String()] = true
		return h
	}
	port := strconv.Itoa(tcp.Port)
	h[net.JoinHostPort(tcp.IP.String(), port)] = true
	if tcp.IP.IsUnspecified() {
		if addrs, err := net.InterfaceAddrs(); err == nil {
			for _, ad := range addrs {
				if ipn, ok := ad.(*net.IPNet); ok {
					h[net.JoinHostPort(ipn.IP.String(), port)] = true
				}
			}
		}
	}
	if tcp.IP.IsLoopback() || tcp.IP.IsUnspecified() {
		h[net.JoinHostPort("localhost", port)] = true
		h[net.JoinHostPort("127.0.0.1", port)] = true
		h[net.JoinHostPort("::1", port)] = true
	}
	return h
}

// AllowHost also accepts requests naming host (HOST:PORT), for a viewer
// reached under a name of its own (the name given to --listen, or a
// tunnel's). Call it before Serve or while serving.
func (v *Viewer) AllowHost(host string) {
	v.mu.Lock()
	defer v.mu.Unlock()
	if v.hosts == nil {
		v.hosts = map[string]bool{}
	}
	v.hosts[strings.ToLower(host)] = true
}

// guard refuses requests with a foreign Host or Origin header: a page on
// another site that rebinds its name to this machine's address names its
// own host in both.
func (v *Viewer) guard(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		v.mu.Lock()
		okHost := v.hosts[strings.ToLower(r.Host)]
		v.mu.Unlock()
		if !okHost {
			http.Error(w, "forbidden: this viewer answers only to its own address", http.StatusForbidden)
			return
		}
		if o := r.Header.Get("Origin"); o != "" && !strings.EqualFold(o, "http://"+r.Host) {
			http.Error(w, "forbidden: request from another site", http.StatusForbidden)
			return
		}
		if r.Header.Get("Sec-Fetch-Site") == "cross-site" {
			http.Error(w, "forbidden: request from another site", http.StatusForbidden)
			return
		}
		w.Header().Set("X-Content-Type-Options", "nosniff")
		w.Header().Set("X-Frame-Options", "DENY")
		w.Header().Set("Referrer-Policy", "no-referrer")
		next.ServeHTTP(w, r)
	})
}

// Handler is the viewer's HTTP handler (page, event stream, controls),
// behind the host and origin guard.
func (v *Viewer) Handler() http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("GET /{$}", v.page)
	mux.HandleFunc("GET /events", v.events)
	mux.HandleFunc("POST /control", v.control)
	return v.guard(mux)
}

// command is a control from the page.
type command struct {
	op    string // pause, resume, step, seed, severity
	value float64
	seed  uint64
}

// control reads one command: op=pause|resume|step, op=seed&value=N,
// op=severity&value=R.
func (v *Viewer) control(w http.ResponseWriter, r *http.Request) {
	r.Body = http.MaxBytesReader(w, r.Body, 1024)
	if err := r.ParseForm(); err != nil {
		http.Error(w, "bad form", http.StatusBadRequest)
		return
	}
	c := command{op: r.PostForm.Get("op")}
	val := r.PostForm.Get("value")
	switch c.op {
	case "pause", "resume", "step":
	case "seed":
		s, err := strconv.ParseUint(strings.TrimSpace(val), 10, 64)
		if err != nil {
			http.Error(w, "seed: want a whole number from 0 to 2^64-1", http.StatusBadRequest)
			return
		}
		c.seed = s
	case "severity":
		f, err := strconv.ParseFloat(strings.TrimSpace(val), 64)
		if err != nil || !(f >= 0 && f <= 1) {
			http.Error(w, "severity: want a number from 0 to 1", http.StatusBadRequest)
			return
		}
		c.value = f
	default:
		http.Error(w, "unknown control", http.StatusBadRequest)
		return
	}
	select {
	case v.cmds <- c:
		w.WriteHeader(http.StatusNoContent)
	case <-time.After(time.Second):
		http.Error(w, "busy", http.StatusServiceUnavailable)
	case <-v.done:
		http.Error(w, "stopped", http.StatusServiceUnavailable)
	}
}

// events streams snapshots as server-sent events, newest first: a slow
// reader gets the latest frame when it is ready, not a queue.
func (v *Viewer) events(w http.ResponseWriter, r *http.Request) {
	sub, ok := v.hub.join()
	if !ok {
		http.Error(w, "too many viewers", http.StatusServiceUnavailable)
		return
	}
	defer v.hub.leave(sub)
	rc := http.NewResponseController(w)
	w.Header().Set("Content-Type", "text/event-stream")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(http.StatusOK)
	if err := rc.Flush(); err != nil {
		return
	}
	for {
		select {
		case <-r.Context().Done():
			return
		case <-v.done:
			return
		case msg := <-sub.ch:
			rc.SetWriteDeadline(time.Now().Add(10 * time.Second))
			if _, err := w.Write(msg); err != nil {
				return
			}
			if err := rc.Flush(); err != nil {
				return
			}
		}
	}
}

// severityOf splits an occlusion option into its kind, ratio and the
// rest ("random:0.3" → random, 0.3, ""); ok is false for kinds without a
// ratio (mask files).
func severityOf(occ string) (kind string, r float64, rest string, ok bool) {
	if occ == "" || occ == "none" {
		return "random", 0, "", true
	}
	kind, arg, _ := strings.Cut(occ, ":")
	if kind == "mask" {
		return kind, 0, "", false
	}
	num, rest, _ := strings.Cut(arg, ":")
	r, err := strconv.ParseFloat(num, 64)
	if err != nil || math.IsNaN(r) {
		return kind, 0, "", false
	}
	return kind, r, rest, true
}

// withSeverity returns occ with its ratio set to r ("none" for 0).
func withSeverity(occ string, r float64) string {
	kind, _, rest, ok := severityOf(occ)
	if !ok {
		return occ
	}
	if r == 0 {
		return "none"
	}
	s := kind + ":" + strconv.FormatFloat(r, 'g', 4, 64)
	if rest != "" {
		s += ":" + rest
	}
	return s
}
