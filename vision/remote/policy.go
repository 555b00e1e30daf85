package remote

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"time"

	"github.com/google/shlex"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
)

// Config sets up a session with an external policy. Game and Grid are
// required; every other zero field takes the default documented on it.
type Config struct {
	// Game is the game's spec (its name and action space are sent).
	Game games.Spec
	// Grid is the geometry tokens are cut on; the frame sent is the
	// frame the tokens cover (Grid.OutW × Grid.OutH × Grid.Channels).
	Grid *patch.Grid
	// Obs is ObsFrame (default) or ObsTokens.
	Obs string
	// Dtype is Uint8 (default) or Float32.
	Dtype string
	// MaxTokens is the largest token set a step carries. Default
	// Grid.N() plus a half (room for noise tokens and duplicates).
	MaxTokens int
	// StepTimeout bounds each step's round trip. Default 5 s.
	StepTimeout time.Duration
	// HandshakeTimeout bounds connecting, starting the process and the
	// handshake (the start timeout, --policy-start-timeout). Default 30 s
	// (a Python policy may import a large framework first).
	HandshakeTimeout time.Duration
	// Clamp clips continuous actions into the bounds instead of treating
	// an out-of-bounds value as a fault. Default false.
	Clamp bool
	// LogDir, if set, keeps the child's stderr in LogDir/LogName.
	// Default: stderr is not kept on disk (its last line still appears in
	// fault messages).
	LogDir string
	// LogName is the stderr log's file name. Default "policy-PID.stderr".
	LogName string
	// Env holds extra environment entries ("KEY=value") for the child,
	// added to tilebench's own environment and the TILEBENCH_* entries
	// (docs/policy-protocol.md, "Child process").
	Env []string
	// Stderr, if set, also receives the child's stderr as it comes.
	Stderr io.Writer
}

func (c Config) withDefaults() (Config, error) {
	if c.Grid == nil {
		return c, errors.New("external policy: no patch grid given")
	}
	if c.Obs == "" {
		c.Obs = ObsFrame
	}
	if c.Obs != ObsFrame && c.Obs != ObsTokens {
		return c, fmt.Errorf("observation kind %q: want %s or %s", c.Obs, ObsFrame, ObsTokens)
	}
	if c.Dtype == "" {
		c.Dtype = Uint8
	}
	if c.Dtype != Uint8 && c.Dtype != Float32 {
		return c, fmt.Errorf("dtype %q: want %s or %s", c.Dtype, Uint8, Float32)
	}
	if c.MaxTokens <= 0 {
		c.MaxTokens = c.Grid.N() + (c.Grid.N()+1)/2
	}
	if c.StepTimeout <= 0 {
		c.StepTimeout = 5 * time.Second
	}
	if c.HandshakeTimeout <= 0 {
		c.HandshakeTimeout = 30 * time.Second
	}
	if d := c.Game.Action.Dim(); d == 0 || d > MaxActionDim {
		return c, fmt.Errorf("action space of %d values: want 1..%d", d, MaxActionDim)
	}
	return c, nil
}

// IsTarget reports whether s names an external policy ("exec:..." or
// "tcp://...").
func IsTarget(s string) bool {
	return strings.HasPrefix(s, "exec:") || strings.HasPrefix(s, "tcp://")
}

// ParseExec splits the command of an "exec:" target as a shell splits
// words (quotes and backslashes), without running a shell.
func ParseExec(target string) ([]string, error) {
	cmd, ok := strings.CutPrefix(target, "exec:")
	if !ok {
		return nil, fmt.Errorf("policy %q: not an exec: target", target)
	}
	argv, err := shlex.Split(cmd)
	if err != nil {
		return nil, fmt.Errorf("policy %q: %v", target, err)
	}
	if len(argv) == 0 {
		return nil, fmt.Errorf("policy %q: exec: names no command", target)
	}
	return argv, nil
}

// ParseTCP checks a "tcp://host:port" target and returns "host:port".
func ParseTCP(target string) (string, error) {
	addr, ok := strings.CutPrefix(target, "tcp://")
	if !ok {
		return "", fmt.Errorf("policy %q: not a tcp:// target", target)
	}
	host, port, err := net.SplitHostPort(addr)
	if err != nil || host == "" || strings.ContainsAny(addr, "/?#@") {
		return "", fmt.Errorf("policy %q: want tcp://HOST:PORT", target)
	}
	if n, err := strconv.Atoi(port); err != nil || n < 1 || n > 65535 {
		return "", fmt.Errorf("policy %q: port %q: want 1..65535", target, port)
	}
	return addr, nil
}

// conn is what a transport gives: pipes or a TCP connection, both with
// deadlines.
type conn interface {
	io.Reader
	io.Writer
	SetReadDeadline(time.Time) error
	SetWriteDeadline(time.Time) error
}

// Policy is an external policy reached over the protocol. It satisfies
// vision.Policy. After a fault every call returns the same *FaultError;
// open a new Policy to try again. A Policy serves one goroutine.
type Policy struct {
	target string
	cfg    Config
	name   string
	invar  bool

	w      conn          // where messages go
	rd     conn          // where replies come from (deadlines)
	r      *bufio.Reader // buffered rd
	closer []io.Closer

	// child process (exec: targets)
	cmd     *exec.Cmd
	pipe    *os.File // the child's stdin
	exited  chan struct{}
	waitErr error
	tail    *tailWriter
	logPath string
	logFile *os.File
	life    lifecycle

	frameShape [3]int
	dim        int
	out        []byte
	hdr        header
	episode    int
	started    bool
	pending    bool // a start message waits to go out with the next step
	pendingEnd bool // an end message (without return) waits to go out
	endEpisode int
	seed       uint64
	fault      *FaultError
	closed     bool
	batch      int    // observations per batch message the policy offered (batch.go)
	head       []byte // the header lines of a message with packed frames (packed.go)
	pk         []byte // a message with packed frames: headRoom, then the frames

	// weights sent with the last action (weights.go)
	wbuf, wtok []float32
	nW         int
	haveW      bool
}

// Open starts (exec:) or connects to (tcp://) the policy named by target
// and runs the handshake. Errors that are the policy's fault wrap
// ErrPolicyFault.
func Open(target string, cfg Config) (*Policy, error) {
	cfg, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	p := &Policy{target: target, cfg: cfg, dim: cfg.Game.Action.Dim(), episode: -1}
	p.frameShape = [3]int{cfg.Grid.OutH, cfg.Grid.OutW, cfg.Grid.Channels}
	switch {
	case strings.HasPrefix(target, "exec:"):
		argv, err := ParseExec(target)
		if err != nil {
			return nil, err
		}
		if err := p.startChild(argv); err != nil {
			return nil, err
		}
	case strings.HasPrefix(target, "tcp://"):
		addr, err := ParseTCP(target)
		if err != nil {
			return nil, err
		}
		c, err := net.DialTimeout("tcp", addr, cfg.HandshakeTimeout)
		if err != nil {
			return nil, fmt.Errorf("policy %s: connect: %w", target, err)
		}
		if tc, ok := c.(*net.TCPConn); ok {
			tc.SetNoDelay(true)
		}
		p.w, p.rd = c, c
		p.r = bufio.NewReaderSize(c, MaxLine)
		p.closer = append(p.closer, c)
	default:
		return nil, fmt.Errorf("policy %q: want exec:COMMAND or tcp://HOST:PORT", target)
	}
	if err := p.handshake(); err != nil {
		p.kill()
		return nil, err
	}
	return p, nil
}

// startChild starts the process in its own process group, with pipes
// that support deadlines.
func (p *Policy) startChild(argv []string) error {
	inR, inW, err := os.Pipe()
	if err != nil {
		return fmt.Errorf("policy %s: %w", p.target, err)
	}
	outR, outW, err := os.Pipe()
	if err != nil {
		inR.Close()
		inW.Close()
		return fmt.Errorf("policy %s: %w", p.target, err)
	}
	cmd := exec.Command(argv[0], argv[1:]...)
	cmd.Stdin, cmd.Stdout = inR, outW
	cmd.SysProcAttr = childAttr()
	cmd.Env = append(os.Environ(),
		"TILEBENCH_PROTOCOL="+strconv.Itoa(Version),
		"TILEBENCH_GAME="+p.cfg.Game.Name,
		"TILEBENCH_OBS="+p.cfg.Obs,
		"PYTHONUNBUFFERED=1",
	)
	cmd.Env = append(cmd.Env, p.cfg.Env...)
	p.tail = &tailWriter{}
	var stderr io.Writer = p.tail
	if p.cfg.Stderr != nil {
		stderr = io.MultiWriter(stderr, p.cfg.Stderr)
	}
	if p.cfg.LogDir != "" {
		if err := os.MkdirAll(p.cfg.LogDir, 0o755); err != nil {
			inR.Close()
			inW.Close()
			outR.Close()
			outW.Close()
			return fmt.Errorf("policy %s: log folder: %w", p.target, err)
		}
	}
	errR, errW, err := os.Pipe()
	if err != nil {
		inR.Close()
		inW.Close()
		outR.Close()
		outW.Close()
		return fmt.Errorf("policy %s: %w", p.target, err)
	}
	cmd.Stderr = errW // an *os.File: cmd.Wait returns when the child exits
	if err := cmd.Start(); err != nil {
		inR.Close()
		inW.Close()
		outR.Close()
		outW.Close()
		errR.Close()
		errW.Close()
		return fmt.Errorf("policy %s: start: %w", p.target, err)
	}
	inR.Close()
	outW.Close()
	errW.Close()
	p.life.startGuard(cmd.Process.Pid)
	p.life.copyStderr(errR, stderr)
	if p.cfg.LogDir != "" {
		name := p.cfg.LogName
		if name == "" {
			name = fmt.Sprintf("policy-%d.stderr", cmd.Process.Pid)
		}
		p.logPath = filepath.Join(p.cfg.LogDir, name)
		f, err := os.Create(p.logPath)
		if err == nil {
			p.logFile = f
			p.tail.setFile(f)
		}
	}
	p.cmd = cmd
	p.exited = make(chan struct{})
	p.w, p.rd = inW, outR
	p.r = bufio.NewReaderSize(outR, MaxLine)
	p.pipe = inW
	p.closer = append(p.closer, inW, outR, errR)
	go p.watch(cmd, inW, outR)
	return nil
}

// Info describes the external policy.
func (p *Policy) Info() vision.Info {
	label := "external policy " + p.target
	if p.name != "" {
		label = "external policy " + p.name + " (" + p.target + ")"
	}
	return vision.Info{Family: "external", Label: label, Invariant: p.invar, WantsFrame: p.cfg.Obs == ObsFrame}
}

// Name is the name the policy gave in its ready message ("" if none).
func (p *Policy) Name() string { return p.name }

// LogPath is the file holding the child's stderr ("" if not kept).
func (p *Policy) LogPath() string { return p.logPath }

// Fault returns the fault that ended the session, or nil.
func (p *Policy) Fault() error {
	if p.fault == nil {
		return nil
	}
	return p.fault
}

func (p *Policy) newFault(phase string, step int, kind Kind, format string, a ...any) *FaultError {
	if p.fault != nil {
		return p.fault
	}
	f := &FaultError{Policy: p.target, Episode: max(p.episode, 0), Step: step, Phase: phase, Kind: kind, Detail: fmt.Sprintf(format, a...)}
	if kind == Crash || kind == IO {
		if d := p.exitStatus(); d != "" {
			f.Detail += " (" + d + ")"
		}
	}
	p.kill()
	if p.tail != nil {
		f.Stderr = p.tail.lastLine()
	}
	f.Log = p.logPath
	p.fault = f
	return f
}

// exitStatus waits briefly for the child to end and describes how.
func (p *Policy) exitStatus() string {
	if p.cmd == nil {
		return ""
	}
	select {
	case <-p.exited:
	case <-time.After(time.Second):
		return "still running"
	}
	if p.waitErr == nil {
		return "exit status 0"
	}
	var ee *exec.ExitError
	if errors.As(p.waitErr, &ee) {
		return ee.ProcessState.String()
	}
	return p.waitErr.Error()
}

// kill ends the child's whole process group and closes the transport.
func (p *Policy) kill() {
	if p.cmd != nil && p.cmd.Process != nil {
		p.life.stopGuard()
		killTree(p.cmd.Process)
		select {
		case <-p.exited:
		case <-time.After(3 * time.Second):
		}
	}
	for _, c := range p.closer {
		c.Close()
	}
	p.closer = nil
	if p.logFile != nil {
		p.tail.setFile(nil)
		p.logFile.Close()
		p.logFile = nil
	}
}

// readLine reads one header line before deadline.
func (p *Policy) readLine(phase string, step int, deadline time.Time, timeout time.Duration) ([]byte, *FaultError) {
	p.setReadDeadline(deadline)
	line, err := p.r.ReadSlice('\n')
	if err != nil {
		switch {
		case errors.Is(err, bufio.ErrBufferFull):
			return nil, p.newFault(phase, step, TooLarge, "reply header longer than %d bytes", MaxLine)
		case errors.Is(err, os.ErrDeadlineExceeded) && p.childGone():
			return nil, p.newFault(phase, step, Crash, "policy process exited before it replied")
		case errors.Is(err, os.ErrDeadlineExceeded):
			return nil, p.newFault(phase, step, Timeout, "no reply within %v%s", timeout, timeoutHint(phase))
		case errors.Is(err, io.EOF) || errors.Is(err, os.ErrClosed) || errors.Is(err, net.ErrClosed):
			if len(line) > 0 {
				return nil, p.newFault(phase, step, Crash, "output ended inside a reply")
			}
			return nil, p.newFault(phase, step, Crash, "policy closed its output")
		default:
			return nil, p.newFault(phase, step, Crash, "read: %v", err)
		}
	}
	return line[:len(line)-1], nil
}

func (p *Policy) write(phase string, step int, b []byte, deadline time.Time, timeout time.Duration) *FaultError {
	p.setWriteDeadline(deadline)
	_, err := p.w.Write(b)
	return p.writeFault(phase, step, err, timeout)
}

// writeFault is the fault of a failed write of the policy's input (nil
// for a nil err).
func (p *Policy) writeFault(phase string, step int, err error, timeout time.Duration) *FaultError {
	if err != nil {
		if errors.Is(err, syscall.EPIPE) && p.cmd != nil {
			// The read end is closed: the child has exited or is
			// exiting. Give its exit a moment to be seen.
			select {
			case <-p.exited:
			case <-time.After(time.Second):
			}
		}
		if (errors.Is(err, os.ErrDeadlineExceeded) || errors.Is(err, syscall.EPIPE)) && p.childGone() {
			return p.newFault(phase, step, Crash, "policy process exited before it read its input")
		}
		if errors.Is(err, os.ErrDeadlineExceeded) {
			return p.newFault(phase, step, Timeout, "policy did not read its input within %v%s", timeout, timeoutHint(phase))
		}
		return p.newFault(phase, step, IO, "write: %v", err)
	}
	return nil
}

// parseReply parses a reply line and handles the messages every phase
// may see (error, payloads).
func (p *Policy) parseReply(phase string, step int, line []byte) *FaultError {
	if err := p.hdr.parse(line); err != nil {
		return p.newFault(phase, step, Garbage, "%v: %q (stdout must carry protocol messages only; log to stderr)", err, clip(line))
	}
	if n, ok, err := p.hdr.integer("len", 0, math.MaxInt64); err != nil {
		return p.newFault(phase, step, Protocol, "%v", err)
	} else if ok && n > 0 {
		return p.newFault(phase, step, TooLarge, "reply announces a payload of %d bytes; version %d replies carry none", n, Version)
	}
	if p.hdr.isMsg("error") {
		reason, _ := p.hdr.str("reason")
		return p.newFault(phase, step, Reported, "policy reported an error: %s", clipString(reason))
	}
	return nil
}

func (p *Policy) handshake() error {
	h := Hello{
		Msg: "hello", Protocol: Version, Game: p.cfg.Game.Name, Obs: p.cfg.Obs, Dtype: p.cfg.Dtype,
		Frame:  p.frameShape,
		Tokens: layoutOf(p.cfg.Grid, p.cfg.MaxTokens),
		Action: specOf(p.cfg.Game.Action),
	}
	h.Limits = Limits{
		MaxLine:            MaxLine,
		MaxPayload:         max(payloadSize(ObsFrame, p.cfg.Dtype, p.frameShape, 0, 0), payloadSize(ObsTokens, p.cfg.Dtype, p.frameShape, p.cfg.MaxTokens, p.cfg.Grid.D())),
		StepTimeoutMS:      p.cfg.StepTimeout.Milliseconds(),
		HandshakeTimeoutMS: p.cfg.HandshakeTimeout.Milliseconds(),
	}
	if h.Limits.MaxPayload > MaxPayload {
		p.kill()
		return fmt.Errorf("policy %s: a step would carry %d bytes, more than the protocol's %d", p.target, h.Limits.MaxPayload, MaxPayload)
	}
	b, err := json.Marshal(h)
	if err != nil {
		return fmt.Errorf("policy %s: %w", p.target, err)
	}
	b = append(b, '\n')
	to := p.cfg.HandshakeTimeout
	deadline := time.Now().Add(to)
	if f := p.write("handshake", -1, b, deadline, to); f != nil {
		return f
	}
	line, f := p.readLine("handshake", -1, deadline, to)
	if f != nil {
		return f
	}
	if f := p.parseReply("handshake", -1, line); f != nil {
		return f
	}
	switch {
	case p.hdr.isMsg("refuse"):
		reason, _ := p.hdr.str("reason")
		return p.newFault("handshake", -1, Refused, "policy refused the session: %s", clipString(reason))
	case p.hdr.isMsg("ready"):
	default:
		return p.newFault("handshake", -1, Protocol, "want ready or refuse, got %q", clipString(p.hdr.msg()))
	}
	v, ok, err := p.hdr.integer("protocol", 0, 1<<31)
	if err != nil || !ok || v != Version {
		return p.newFault("handshake", -1, Protocol, "ready must state protocol %d", Version)
	}
	p.name, _ = p.hdr.str("name")
	p.name = clipString(p.name)
	if f := p.hdr.get("invariant"); f != nil && f.kind == kindBool && string(f.raw) == "true" {
		p.invar = true
	}
	if f := p.readBatch(); f != nil {
		return f
	}
	p.out = make([]byte, 0, h.Limits.MaxPayload+1024)
	if p.pipe != nil {
		// Room for a whole batch where the kernel allows, so that the
		// child reads a batch in a few wakeups, not one per default pipe.
		growPipe(p.pipe, min(1<<20, max(1, p.BatchSize())*h.Limits.MaxPayload+MaxLine))
	}
	return nil
}

// appendEnd appends an end message for an episode.
func appendEnd(b []byte, episode int, ret float64, steps int, known bool) []byte {
	b = append(b, `{"msg":"end","episode":`...)
	b = strconv.AppendInt(b, int64(episode), 10)
	if known {
		b = append(b, `,"return":`...)
		b = appendFloat(b, ret)
		b = append(b, `,"steps":`...)
		b = strconv.AppendInt(b, int64(steps), 10)
	}
	return append(b, "}\n"...)
}

// Reset starts a new episode: the start message (with seed) goes out with
// the first step. An episode left without End gets an end message
// without its return first.
func (p *Policy) Reset(seed uint64) {
	if p.fault != nil || p.closed {
		return
	}
	if p.started && !p.pending {
		p.pendingEnd, p.endEpisode = true, p.episode
	}
	p.episode++
	p.seed = seed
	p.started = true
	p.pending = true
}

// prefix appends the messages that wait to go out before the next one.
func (p *Policy) prefix(b []byte) []byte {
	if p.pendingEnd {
		b = appendEnd(b, p.endEpisode, 0, 0, false)
		p.pendingEnd = false
	}
	if p.pending {
		b = p.appendStart(b)
		p.pending = false
	}
	return b
}

// End tells the policy the episode's return and length. Optional: a
// runner that knows the return calls it after the last step.
func (p *Policy) End(ret float64, steps int) error {
	if p.fault != nil {
		return p.fault
	}
	if !p.started || p.closed {
		return nil
	}
	if math.IsNaN(ret) || math.IsInf(ret, 0) {
		ret = 0
	}
	b := p.prefix(p.out[:0])
	b = appendEnd(b, p.episode, ret, steps, true)
	p.started = false
	to := p.cfg.StepTimeout
	if f := p.write("end", -1, b, time.Now().Add(to), to); f != nil {
		return f
	}
	return nil
}

func (p *Policy) appendStart(b []byte) []byte {
	b = append(b, `{"msg":"start","episode":`...)
	b = strconv.AppendInt(b, int64(p.episode), 10)
	b = append(b, `,"seed":`...)
	b = strconv.AppendUint(b, p.seed, 10)
	return append(b, "}\n"...)
}

// Act sends the observation and reads and checks the action.
func (p *Policy) Act(obs *vision.Observation, action []float64) error {
	return p.act(obs, nil, action)
}

// act is Act, with the frame taken from packed (PackedFrame's layout)
// instead of obs.Frame when packed is not nil.
func (p *Policy) act(obs *vision.Observation, packed []byte, action []float64) error {
	if p.fault != nil {
		return p.fault
	}
	if p.closed {
		return fmt.Errorf("policy %s: closed", p.target)
	}
	step := obs.Step
	if len(action) != p.dim {
		return fmt.Errorf("policy %s: action buffer of %d values, game wants %d", p.target, len(action), p.dim)
	}
	if packed != nil {
		if err := p.checkPacked(len(packed), 1); err != nil {
			return err
		}
	}
	if !p.started {
		p.Reset(0)
	}
	b := p.out[:0]
	if packed != nil {
		b = p.head[:0]
	}
	b = p.prefix(b)
	b = append(b, `{"msg":"step","t":`...)
	b = strconv.AppendInt(b, int64(step), 10)
	n := 0
	if p.cfg.Obs == ObsTokens {
		ts := obs.Tokens
		if ts == nil || ts.N > p.cfg.MaxTokens || ts.D != p.cfg.Grid.D() {
			return fmt.Errorf("policy %s: step %d: token set does not fit the session (at most %d tokens of %d values)", p.target, step, p.cfg.MaxTokens, p.cfg.Grid.D())
		}
		n = ts.N
		b = append(b, `,"n":`...)
		b = strconv.AppendInt(b, int64(n), 10)
	} else if packed == nil && (obs.Frame == nil || obs.Frame.Rect.Dx() != p.frameShape[1] || obs.Frame.Rect.Dy() != p.frameShape[0]) {
		return fmt.Errorf("policy %s: step %d: observation has no %dx%d frame", p.target, step, p.frameShape[1], p.frameShape[0])
	}
	b = append(b, `,"prev":[`...)
	for i, v := range obs.PrevAction {
		if i > 0 {
			b = append(b, ',')
		}
		b = appendFloat(b, v)
	}
	b = append(b, `],"len":`...)
	b = strconv.AppendInt(b, int64(payloadSize(p.cfg.Obs, p.cfg.Dtype, p.frameShape, n, p.cfg.Grid.D())), 10)
	b = append(b, "}\n"...)
	switch {
	case packed != nil:
		p.head = b
		b = p.place(b, packed)
	case p.cfg.Obs == ObsTokens:
		b = appendTokens(b, obs.Tokens, p.cfg.Dtype)
		p.out = b
	default:
		b = appendFrame(b, obs.Frame, p.frameShape[2], p.cfg.Dtype)
		p.out = b
	}
	to := p.cfg.StepTimeout
	deadline := time.Now().Add(to)
	if f := p.write("step", step, b, deadline, to); f != nil {
		return f
	}
	line, f := p.readLine("step", step, deadline, to)
	if f != nil {
		return f
	}
	if f := p.parseReply("step", step, line); f != nil {
		return f
	}
	if !p.hdr.isMsg("action") {
		return p.newFault("step", step, Protocol, "want an action, got %q", clipString(p.hdr.msg()))
	}
	if t, ok, err := p.hdr.integer("t", math.MinInt64, math.MaxInt64); err != nil || !ok || t != int64(step) {
		return p.newFault("step", step, Protocol, "action must carry \"t\":%d", step)
	}
	vals, ok, err := p.hdr.floats("action")
	if err != nil || !ok {
		return p.newFault("step", step, Shape, "action must be an array of numbers")
	}
	if err := p.check(step, vals, action); err != nil {
		return err
	}
	return p.takeWeights(step, obs)
}

// check validates vals against the action space and copies them into
// action.
func (p *Policy) check(step int, vals, action []float64) error {
	sp := p.cfg.Game.Action
	if len(vals) != p.dim {
		return p.newFault("step", step, Shape, "action has %d values, want %d", len(vals), p.dim)
	}
	for i, v := range vals {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return p.newFault("step", step, NonFinite, "action value %d is %v", i, v)
		}
	}
	if sp.Kind == games.Discrete {
		c := vals[0]
		if c != math.Trunc(c) || c < 0 || int(c) >= sp.Choices() {
			return p.newFault("step", step, Shape, "choice %v is not one of 0..%d", c, sp.Choices()-1)
		}
		action[0] = c
		return nil
	}
	for i, v := range vals {
		lo, hi := sp.Low[i], sp.High[i]
		if v < lo || v > hi {
			if !p.cfg.Clamp {
				return p.newFault("step", step, Bounds, "action value %d (%s) = %v outside [%v, %v]", i, sp.Names[i], v, lo, hi)
			}
			v = min(hi, max(lo, v))
		}
		action[i] = v
	}
	return nil
}

// Close ends the session: it sends bye, gives the child a moment to exit,
// then kills its process group. It returns the fault, if the session
// ended in one.
func (p *Policy) Close() error {
	if p.closed {
		return p.Fault()
	}
	p.closed = true
	if p.fault != nil {
		return p.fault
	}
	if p.started && !p.pending {
		p.pendingEnd, p.endEpisode = true, p.episode
	}
	p.pending = false
	b := p.prefix(p.out[:0])
	b = append(b, "{\"msg\":\"bye\"}\n"...)
	p.w.SetWriteDeadline(time.Now().Add(time.Second))
	p.w.Write(b)
	if p.cmd != nil {
		// Closing its input tells a child that reads to the end to stop.
		if c, ok := p.w.(io.Closer); ok {
			c.Close()
		}
		select {
		case <-p.exited:
		case <-time.After(2 * time.Second):
		}
	}
	p.kill()
	return nil
}

// clip shortens a reply for an error message.
func clip(b []byte) string {
	if len(b) > 80 {
		return string(b[:80]) + "..."
	}
	return string(b)
}

func clipString(s string) string {
	if len(s) > 200 {
		s = s[:200] + "..."
	}
	return oneLine(s)
}

// tailWriter keeps the last few KiB of a stream (and copies it to a file).
type tailWriter struct {
	mu   sync.Mutex
	buf  []byte
	file io.Writer
}

const tailKeep = 4 << 10

func (t *tailWriter) setFile(f *os.File) {
	t.mu.Lock()
	defer t.mu.Unlock()
	if f == nil {
		t.file = nil
		return
	}
	t.file = f
	t.file.Write(t.buf) // what came before the file was open
}

func (t *tailWriter) Write(b []byte) (int, error) {
	t.mu.Lock()
	defer t.mu.Unlock()
	if t.file != nil {
		t.file.Write(b)
	}
	t.buf = append(t.buf, b...)
	if len(t.buf) > tailKeep {
		t.buf = append(t.buf[:0], t.buf[len(t.buf)-tailKeep:]...)
	}
	return len(b), nil
}

// lastLine returns the last non-empty line written.
func (t *tailWriter) lastLine() string {
	t.mu.Lock()
	defer t.mu.Unlock()
	lines := strings.Split(strings.TrimRight(string(t.buf), "\n\r "), "\n")
	return clipString(strings.TrimSpace(lines[len(lines)-1]))
}
