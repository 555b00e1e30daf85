package probe

import (
	"bufio"
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"tilebench/internal/reftest"
	"tilebench/vision/study"
)

var numpyExample = filepath.Join("..", "..", "examples", "policy_numpy.py")

// listenNumpy starts examples/policy_numpy.py serving TCP on a free port
// and returns its tcp:// target.
func listenNumpy(t *testing.T, args ...string) string {
	t.Helper()
	cmd := exec.Command(reftest.Python, append(append([]string{numpyExample}, args...), "--listen", "127.0.0.1:0")...)
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
	addr := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(stderr)
		re := regexp.MustCompile(`listening on (\S+)`)
		for sc.Scan() {
			if m := re.FindStringSubmatch(sc.Text()); m != nil {
				addr <- m[1]
			}
		}
	}()
	select {
	case a := <-addr:
		return "tcp://" + a
	case <-time.After(30 * time.Second):
		t.Fatal("policy_numpy.py did not start listening")
	}
	return ""
}

// TestExternalNumpy: the NumPy example over exec: and over tcp://, with
// batched messages and without, gives the same results.jsonl; only the
// fingerprint (which names the policy source) differs between sources.
func TestExternalNumpy(t *testing.T) {
	reftest.Need(t, "numpy")
	dir := t.TempDir()
	rec := recording(t, dir, 40, 48, 32)
	eps := filepath.Join(dir, "e.csv")
	os.WriteFile(eps, []byte("0\n13\n29\n"), 0o644)
	acts := filepath.Join(dir, "a.npy")
	writeNPY(t, acts, 40, 2, false, func(i, j int) float64 { return 0.05 * float64(i%7-j) })
	axes := study.Axes{Scramble: study.Axis{"none,full,partial:0.5"}, Occlude: study.Axis{"none,block:0.3"}, NoiseTokens: study.Axis{"0,3"}}
	var first []byte
	var firstFP string
	for _, c := range []struct {
		name, policy string
		noBatch      bool
	}{
		{"exec-batch", "exec:" + reftest.Python + " " + numpyExample, false},
		{"exec-single", "exec:" + reftest.Python + " " + numpyExample, true},
		{"exec-nooffer", "exec:" + reftest.Python + " " + numpyExample + " --batch 0", false},
		{"tcp-batch", listenNumpy(t), false},
		{"tcp-single", listenNumpy(t), true},
	} {
		p := plan(t, Config{In: rec, Episodes: eps, Actions: acts, Policy: c.policy, NoBatch: c.noBatch, Axes: axes, Resamples: 200})
		out := filepath.Join(dir, c.name)
		if _, err := Run(context.Background(), p, Options{Dir: out, Workers: 2, NoReport: true}); err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		got := read(t, filepath.Join(out, resultsFile))
		if bytes.Contains(got, []byte(`"failure"`)) {
			t.Fatalf("%s: failed units:\n%s", c.name, got)
		}
		if first == nil {
			first, firstFP = got, p.Fingerprint
			if !bytes.Contains(got, []byte(`"drift":[0.`)) && !bytes.Contains(got, []byte(`,0.`)) {
				t.Fatalf("%s: no drift anywhere: the rule does not read the picture?", c.name)
			}
			continue
		}
		norm := bytes.ReplaceAll(got, []byte(p.Fingerprint), []byte(firstFP))
		if !bytes.Equal(norm, first) {
			t.Errorf("%s: results.jsonl differs from exec-batch", c.name)
		}
	}
}

// TestActionWidthChanges: an external policy whose action width changes
// between calls fails its unit with one line naming the step and the
// widths, and the run reports it.
func TestActionWidthChanges(t *testing.T) {
	reftest.Need(t)
	dir := t.TempDir()
	rec := recording(t, dir, 12, 32, 32)
	script := filepath.Join(dir, "bad.py")
	os.WriteFile(script, []byte(`import json, sys
inp, out = sys.stdin.buffer, sys.stdout.buffer
def send(m):
    out.write(json.dumps(m).encode() + b"\n"); out.flush()
json.loads(inp.readline())
send({"msg": "ready", "protocol": 1})
while True:
    line = inp.readline()
    if not line:
        break
    m = json.loads(line)
    inp.read(m.get("len", 0))
    if m["msg"] == "step":
        send({"msg": "action", "t": m["t"], "action": [0.0] * (2 if m["t"] < 5 else 3)})
    elif m["msg"] == "bye":
        break
`), 0o644)
	p := plan(t, Config{In: rec, Policy: "exec:" + reftest.Python + " " + script, ActionSpace: "continuous:2", Resamples: 200})
	o, err := Run(context.Background(), p, Options{Dir: filepath.Join(dir, "out"), Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	if o.Failed != 1 || !strings.Contains(o.FirstFailure, "step 5") || !strings.Contains(o.FirstFailure, "3 values, want 2") || strings.Contains(o.FirstFailure, "\n") {
		t.Errorf("failed %d, first failure %q", o.Failed, o.FirstFailure)
	}
}

// TestPolicyThatRefuses: a policy that refuses the session stops the
// probe before anything is written; the folder made for it goes again.
func TestPolicyThatRefuses(t *testing.T) {
	reftest.Need(t)
	dir := t.TempDir()
	rec := recording(t, dir, 4, 16, 16)
	script := filepath.Join(dir, "no.py")
	os.WriteFile(script, []byte(`import json, sys
json.loads(sys.stdin.buffer.readline())
sys.stdout.write(json.dumps({"msg": "refuse", "reason": "trained on another robot"}) + "\n")
sys.stdout.flush()
`), 0o644)
	p := plan(t, Config{In: rec, Policy: "exec:" + reftest.Python + " " + script, ActionSpace: "continuous:2", Resamples: 100})
	out := filepath.Join(dir, "out")
	_, err := Run(context.Background(), p, Options{Dir: out, Workers: 1})
	if err == nil || !strings.Contains(err.Error(), "another robot") {
		t.Fatalf("refusing policy: %v", err)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("the output folder was left behind")
	}
}
