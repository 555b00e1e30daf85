package remote

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"tilebench/patch"
)

// lifecycleHelper runs the helper modes of the tests in this file:
//
//	grandcrash:K  at step K, start a grandchild that holds stdout and
//	              stderr, then exit with status 3
//	hold          start a grandchild in the group, then serve zeros
//	orphanparent  open a "hold" policy, print "pgid N", wait to be killed
func lifecycleHelper(mode string) (int, bool) {
	switch {
	case strings.HasPrefix(mode, "grandcrash:"):
		at, _ := strconv.Atoi(strings.TrimPrefix(mode, "grandcrash:"))
		in := bufio.NewReader(os.Stdin)
		var h Hello
		line, err := in.ReadBytes('\n')
		if err != nil || json.Unmarshal(line, &h) != nil {
			return 1, true
		}
		fmt.Println(`{"msg":"ready","protocol":1}`)
		for {
			line, err := in.ReadBytes('\n')
			if err != nil {
				return 0, true
			}
			var m struct {
				Msg string `json:"msg"`
				T   int    `json:"t"`
				Len int    `json:"len"`
			}
			json.Unmarshal(line, &m)
			if m.Len > 0 {
				in.Discard(m.Len)
			}
			if m.Msg != "step" {
				continue
			}
			if m.T == at {
				c := exec.Command("sleep", "300")
				c.Stdout, c.Stderr = os.Stdout, os.Stderr
				c.Start()
				fmt.Fprintf(os.Stderr, "grandchild %d; crashing\n", c.Process.Pid)
				return 3, true
			}
			fmt.Printf(`{"msg":"action","t":%d,"action":[0,0]}`+"\n", m.T)
		}
	case mode == "hold":
		c := exec.Command("sleep", "300")
		c.Start()
		err := Serve(os.Stdin, os.Stdout, zeroPolicy{}, ServeOptions{Name: "hold"})
		return exitCode(err), true
	case mode == "orphanparent":
		exe, _ := os.Executable()
		grid, _ := patch.NewGrid(patch.GridConfig{Width: 32, Height: 24, PatchW: 8})
		p, err := Open("exec:"+exe+" -test.run=^$", Config{Game: (&blobs{}).Spec(), Grid: grid, Env: []string{helperEnv + "=hold"}})
		if err != nil {
			fmt.Println("error", err)
			return 1, true
		}
		fmt.Printf("pgid %d\n", p.cmd.Process.Pid)
		time.Sleep(time.Hour)
		return 0, true
	}
	return 0, false
}

// groupMembers lists the live (not zombie) processes of group pgid, from
// /proc (proc(5): the fields after the command are state, ppid, pgrp).
func groupMembers(pgid int) []string {
	var out []string
	stats, _ := filepath.Glob("/proc/[0-9]*/stat")
	for _, f := range stats {
		b, err := os.ReadFile(f)
		if err != nil {
			continue
		}
		s := string(b)
		i := strings.LastIndexByte(s, ')')
		if i < 0 {
			continue
		}
		fields := strings.Fields(s[i+1:])
		if len(fields) < 3 || fields[0] == "Z" {
			continue
		}
		if g, _ := strconv.Atoi(fields[2]); g == pgid {
			out = append(out, s[:i+1])
		}
	}
	return out
}

// A policy that starts a helper holding its stdout and stderr, then
// crashes, is reported as a crash with its exit status as soon as it
// exits; it used to wait out the whole step timeout and be called a
// timeout. The helper goes with the group.
func TestCrashBehindGrandchild(t *testing.T) {
	p, err := open(t, "grandcrash:2", func(c *Config) { c.StepTimeout = 20 * time.Second })
	if err != nil {
		t.Fatal(err)
	}
	pgid := p.cmd.Process.Pid
	start := time.Now()
	_, err = episode(t, p, patch.Spec{}, 1)
	var fe *FaultError
	if !errors.As(err, &fe) || fe.Kind != Crash || fe.Step != 2 {
		t.Fatalf("error %v: want a crash at step 2", err)
	}
	if el := time.Since(start); el > 5*time.Second {
		t.Fatalf("crash reported after %v", el)
	}
	if !strings.Contains(err.Error(), "exit status 3") || !strings.Contains(err.Error(), "crashing") {
		t.Fatalf("message %q: want the exit status and the last stderr line", err)
	}
	if m := groupMembers(pgid); runtime.GOOS == "linux" && len(m) > 0 {
		t.Fatalf("group %d still has %v", pgid, m)
	}
}

// The start timeout (Config.HandshakeTimeout) bounds the handshake, and
// the message says which setting fired and how to raise it.
func TestStartTimeoutStated(t *testing.T) {
	start := time.Now()
	_, err := open(t, "silent", func(c *Config) { c.HandshakeTimeout = 400 * time.Millisecond; c.StepTimeout = time.Minute })
	var fe *FaultError
	if !errors.As(err, &fe) || fe.Kind != Timeout {
		t.Fatalf("error %v", err)
	}
	if el := time.Since(start); el > 5*time.Second {
		t.Fatalf("handshake timeout after %v", el)
	}
	if msg := err.Error(); !strings.Contains(msg, "400ms") || !strings.Contains(msg, "--policy-start-timeout") {
		t.Fatalf("message %q: want the start timeout and its flag", msg)
	}
	p, err := open(t, "hang:1", func(c *Config) { c.StepTimeout = 300 * time.Millisecond })
	if err != nil {
		t.Fatal(err)
	}
	start = time.Now()
	_, err = episode(t, p, patch.Spec{}, 1)
	if !errors.As(err, &fe) || fe.Kind != Timeout || time.Since(start) > 5*time.Second || !strings.Contains(err.Error(), "--policy-timeout") {
		t.Fatalf("step timeout: %v after %v", err, time.Since(start))
	}
}

// A fault names the step once and no episode number of its own: the
// session's count from 0 is not the caller's, who adds theirs.
func TestFaultNumbersOnce(t *testing.T) {
	p, err := open(t, "crash:5", nil)
	if err != nil {
		t.Fatal(err)
	}
	_, err = episode(t, p, patch.Spec{}, 1)
	var fe *FaultError
	if !errors.As(err, &fe) {
		t.Fatalf("error %v", err)
	}
	if msg := fe.Error(); strings.Contains(msg, "episode") || strings.Count(msg, "step 5:") != 1 {
		t.Fatalf("message %q: want step 5 once and no episode number", msg)
	}
}

// SIGKILL of the process that runs a policy ends the policy's whole
// process group (the child and its own children) within 2 s: the child
// has a parent-death signal, and the watchdog kills the group when its
// input from the dead parent ends.
func TestNoOrphansAfterParentKill(t *testing.T) {
	if runtime.GOOS != "linux" {
		t.Skip("reads /proc")
	}
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	parent := exec.Command(exe, "-test.run=^$")
	parent.Env = append(os.Environ(), helperEnv+"=orphanparent")
	out, err := parent.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := parent.Start(); err != nil {
		t.Fatal(err)
	}
	line, err := bufio.NewReader(out).ReadString('\n')
	var pgid int
	if _, serr := fmt.Sscanf(line, "pgid %d", &pgid); err != nil || serr != nil {
		parent.Process.Kill()
		t.Fatalf("parent said %q (%v)", line, err)
	}
	deadline := time.Now().Add(5 * time.Second)
	for len(groupMembers(pgid)) < 2 && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond) // the child and its grandchild
	}
	if n := len(groupMembers(pgid)); n < 2 {
		parent.Process.Kill()
		t.Fatalf("group %d has %d live processes before the kill, want 2", pgid, n)
	}
	parent.Process.Signal(syscall.SIGKILL)
	parent.Wait()
	killed := time.Now()
	for len(groupMembers(pgid)) > 0 && time.Since(killed) < 2*time.Second {
		time.Sleep(10 * time.Millisecond)
	}
	if m := groupMembers(pgid); len(m) > 0 {
		syscall.Kill(-pgid, syscall.SIGKILL)
		t.Fatalf("2 s after the parent's SIGKILL, group %d still has %v", pgid, m)
	}
	t.Logf("group gone %v after the parent's SIGKILL", time.Since(killed).Round(time.Millisecond))
}
