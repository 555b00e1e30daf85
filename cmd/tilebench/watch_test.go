package main

import (
	"bufio"
	"context"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"tilebench/internal/reftest"
	"tilebench/vision/nets"
	"tilebench/vision/remote"
)

// syncBuffer is a bytes buffer safe to read while a command writes it.
type syncBuffer struct {
	mu sync.Mutex
	b  strings.Builder
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

var watchURL = regexp.MustCompile(`http://127\.0\.0\.1:\d+/`)

// startWatch runs "tilebench watch ARGS" in-process until the returned
// stop is called (as Ctrl-C would); it returns the page's URL.
func startWatch(t *testing.T, args ...string) (url string, stop func() int) {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	old := watchContext
	watchContext = func() (context.Context, context.CancelFunc) { return ctx, cancel }
	t.Cleanup(func() { watchContext = old })
	var out, errb syncBuffer
	rc := &runContext{stdin: strings.NewReader(""), stdout: &out, stderr: &errb}
	done := make(chan int, 1)
	go func() { done <- run(rc, append([]string{"watch"}, args...)) }()
	deadline := time.Now().Add(20 * time.Second)
	for {
		if u := watchURL.FindString(out.String()); u != "" {
			url = u
			break
		}
		select {
		case code := <-done:
			t.Fatalf("watch ended with %d before serving: %s", code, errb.String())
		default:
		}
		if time.Now().After(deadline) {
			t.Fatalf("no URL printed: %q %q", out.String(), errb.String())
		}
		time.Sleep(20 * time.Millisecond)
	}
	return url, func() int {
		cancel()
		select {
		case code := <-done:
			return code
		case <-time.After(15 * time.Second):
			t.Fatal("watch did not stop")
			return -1
		}
	}
}

func firstEvent(t *testing.T, url string) string {
	t.Helper()
	resp, err := http.Get(url + "events")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	br := bufio.NewReader(resp.Body)
	for {
		line, err := br.ReadString('\n')
		if err != nil {
			t.Fatalf("event stream: %v", err)
		}
		if strings.HasPrefix(line, "data: ") {
			return line
		}
	}
}

func TestWatchUsageErrors(t *testing.T) {
	for _, args := range [][]string{
		{"watch"}, {"watch", "--game", "paddle", "--fps", "0"}, {"watch", "--game", "paddle", "--overlay", "glow"},
		{"watch", "--game", "paddle", "--occlude", "random:2"}, {"watch", "--game", "paddle", "--listen", "nowhere"},
		{"watch", "--game", "paddle", "extra"},
	} {
		code, _, stderr := runCLI(t, "", args...)
		if code != 2 || strings.Count(stderr, "\n") != 1 {
			t.Errorf("%v: exit %d, stderr %q; want 2 and one line", args, code, stderr)
		}
	}
}

func TestWatchServesWeightsPolicy(t *testing.T) {
	url, stop := startWatch(t, "--game", "drive", "--policy", filepath.Join(reftest.Root(), "testdata", "policies", "drive-attention-p8.safetensors"),
		"--occlude", "random:0.3", "--corrupt", "blur:s2")
	ev := firstEvent(t, url)
	if !strings.Contains(ev, `"has_weights":true`) || !strings.Contains(ev, "random:0.3") || !strings.Contains(ev, "blur") {
		t.Fatalf("event %.300s", ev)
	}
	if code := stop(); code != 0 {
		t.Fatalf("exit %d after Ctrl-C", code)
	}
}

// Ctrl-C ends the server and the external policy's whole process group.
func TestWatchStopEndsExternalProcessGroup(t *testing.T) {
	reftest.Need(t)
	dir := t.TempDir()
	script := filepath.Join(reftest.Root(), "examples", "policy_stdlib.py")
	pidFile := filepath.Join(dir, "helper.pid")
	// The policy starts a helper of its own, as real ones do.
	policy := "exec:/bin/sh -c 'sleep 300 & echo $! > " + pidFile + "; exec " + reftest.Python + " " + script + "'"
	url, stop := startWatch(t, "--game", "paddle", "--patch", "20", "--policy", policy)
	if ev := firstEvent(t, url); !strings.Contains(ev, `"has_weights":true`) {
		t.Fatalf("the example's weights did not arrive: %.300s", ev)
	}
	b, err := os.ReadFile(pidFile)
	if err != nil {
		t.Fatal(err)
	}
	pid, _ := strconv.Atoi(strings.TrimSpace(string(b)))
	if pid <= 0 || syscall.Kill(pid, 0) != nil {
		t.Fatalf("helper %q not running", b)
	}
	if code := stop(); code != 0 {
		t.Fatalf("exit %d after Ctrl-C", code)
	}
	deadline := time.Now().Add(5 * time.Second)
	for syscall.Kill(pid, 0) == nil {
		// A killed child stays a zombie until its parent (the shell,
		// itself gone) is reaped; check the state too.
		if st, err := os.ReadFile("/proc/" + strconv.Itoa(pid) + "/stat"); err == nil && strings.Contains(string(st), ") Z ") {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("policy helper %d still running after watch stopped", pid)
		}
		time.Sleep(50 * time.Millisecond)
	}
	if _, err := http.Get(url); err == nil {
		t.Fatal("server still answering after Ctrl-C")
	}
}

// A policy served over TCP (remote.Serve with the shipped p8 net) sends
// its weights with each action; watch draws them.
func TestWatchTCPPolicyWeights(t *testing.T) {
	n, err := nets.Load(shippedPolicy("drive-attention-p8.safetensors"))
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	served := make(chan error, 1)
	go func() {
		c, err := ln.Accept()
		if err != nil {
			served <- err
			return
		}
		defer c.Close()
		served <- remote.Serve(c, c, n, remote.ServeOptions{Name: "p8 over tcp"})
	}()
	url, stop := startWatch(t, "--game", "drive", "--patch", "8", "--policy", "tcp://"+ln.Addr().String(),
		"--policy-obs", "tokens", "--policy-dtype", "float32", "--scramble", "full")
	if ev := firstEvent(t, url); !strings.Contains(ev, `"has_weights":true`) {
		t.Fatalf("no weights over tcp: %.300s", ev)
	}
	if code := stop(); code != 0 {
		t.Fatalf("exit %d", code)
	}
	if err := <-served; err != nil {
		t.Fatalf("serve: %v", err)
	}
}
