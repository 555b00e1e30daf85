package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/internal/reftest"
	"tilebench/patch"
	"tilebench/vision/nets"
)

func verifyJSON(t *testing.T, args ...string) (int, map[string]any, string) {
	t.Helper()
	code, out, errs := runCLI(t, "", append([]string{"verify", "--json"}, args...)...)
	var m map[string]any
	if code != 2 {
		if err := json.Unmarshal([]byte(out), &m); err != nil {
			t.Fatalf("verify %v: exit %d, output %q: %v (stderr %s)", args, code, out, err, errs)
		}
	}
	return code, m, errs
}

func stat(m map[string]any, kind, key string) float64 {
	return m[kind].(map[string]any)[key].(float64)
}

func TestVerifyFamilies(t *testing.T) {
	for _, fam := range []string{"attention", "meanpool", "posattention", "mlp"} {
		code, m, errs := verifyJSON(t, "--policy", fam, "--game", "paddle", "--perms", "4", "--seeds", "1", "--frames", "2")
		if code != 0 {
			t.Fatalf("%s: exit %d: %s", fam, code, errs)
		}
		if m["format"].(float64) != 1 || m["family"] != fam || m["compared"] != "output" || !strings.Contains(m["caution"].(string), "safety") {
			t.Fatalf("%s: %v", fam, m)
		}
		perm := stat(m, "permute", "max")
		switch fam {
		case "attention", "meanpool":
			if perm > 1e-5 || m["pass"] != true || m["invariant"] != true {
				t.Errorf("%s: permute %g, pass %v", fam, perm, m["pass"])
			}
		case "mlp":
			if perm < 1e-6 || m["invariant"] != false || stat(m, "noise", "refused") != 8 {
				t.Errorf("mlp: permute %g, noise %v", perm, m["noise"])
			}
		}
	}
	code, out, _ := runCLI(t, "", "verify", "--policy", "attention", "--game", "drive", "--perms", "3", "--seeds", "1", "--frames", "1")
	if code != 0 || !strings.Contains(out, "declared permutation invariant: holds") || !strings.Contains(out, "permute (token order)") {
		t.Fatalf("text output (exit %d):\n%s", code, out)
	}
}

func TestVerifyWeightsFile(t *testing.T) {
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: 120, Height: 80, PatchW: 20})
	if err != nil {
		t.Fatal(err)
	}
	n, err := nets.New(nets.Config{Family: "meanpool"}, grid, g.Spec().Action, 4)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "pool.safetensors")
	if err := nets.Save(path, n, nil); err != nil {
		t.Fatal(err)
	}
	code, m, errs := verifyJSON(t, "--policy", path, "--game", "paddle", "--perms", "3", "--seeds", "1", "--frames", "1")
	if code != 0 || m["family"] != "meanpool" || !strings.Contains(m["grid"].(string), "6x4") {
		t.Fatalf("weights file: exit %d %v %s", code, m, errs)
	}
	// A paddle policy cannot verify on drive.
	code, _, errs = runCLI(t, "", "verify", "--policy", path, "--game", "drive", "--perms", "1")
	if code != 1 || !strings.Contains(errs, "weights are for 120x80 frames") {
		t.Fatalf("wrong game: exit %d %s", code, errs)
	}
	bad := filepath.Join(t.TempDir(), "bad.safetensors")
	os.WriteFile(bad, []byte("garbage!garbage!"), 0o644)
	code, _, errs = runCLI(t, "", "verify", "--policy", bad, "--game", "paddle")
	if code != 1 || strings.Count(errs, "\n") != 1 || !strings.Contains(errs, "bad.safetensors") {
		t.Fatalf("malformed file: exit %d %q", code, errs)
	}
}

func TestVerifyUsage(t *testing.T) {
	for _, args := range [][]string{
		{"--game", "paddle"},
		{"--policy", "attention"},
		{"--policy", "attention", "--game", "paddle", "--perms", "0"},
		{"--policy", "no-such-family-or-file", "--game", "paddle"},
		{"--policy", "attention", "--game", "nope"},
		{"--policy", "attention", "--game", "paddle", "--patch", "200"},
		{"--policy", "exec:", "--game", "paddle"},
		{"--policy", "tcp://nohost", "--game", "paddle"},
		{"--policy", "exec:x", "--game", "paddle", "--policy-obs", "pixels"},
	} {
		code, _, errs := runCLI(t, "", append([]string{"verify"}, args...)...)
		if code != 2 || strings.Count(errs, "\n") != 1 {
			t.Errorf("verify %v: exit %d, stderr %q: want a one-line usage error", args, code, errs)
		}
	}
}

// An external policy that declares itself invariant but reads the token
// order fails verify with exit status 1 and the figure.
const orderPolicyPy = `import json, struct, sys
inp, out = sys.stdin.buffer, sys.stdout.buffer
def send(o):
    out.write(json.dumps(o).encode() + b"\n"); out.flush()
hello = json.loads(inp.readline())
send({"msg": "ready", "protocol": 1, "name": "order reader", "invariant": True})
dim = hello["tokens"]["dim"]
while True:
    line = inp.readline()
    if not line:
        break
    m = json.loads(line)
    data = inp.read(m.get("len", 0))
    if m["msg"] == "bye":
        break
    if m["msg"] == "step":
        first = struct.unpack_from("<f", data, 0)[0]
        send({"msg": "action", "t": m["t"], "action": [0.3 * first, 0.5]})
`

func TestRefVerifyExternalPolicy(t *testing.T) {
	reftest.Need(t)
	script := filepath.Join(t.TempDir(), "order.py")
	if err := os.WriteFile(script, []byte(orderPolicyPy), 0o644); err != nil {
		t.Fatal(err)
	}
	code, m, errs := verifyJSON(t, "--policy", "exec:"+reftest.Python+" "+script, "--policy-obs", "tokens", "--policy-dtype", "float32",
		"--game", "drive", "--perms", "5", "--seeds", "1", "--frames", "2")
	if code != 1 || m["pass"] != false || m["invariant"] != true || stat(m, "permute", "max") <= 1e-5 {
		t.Fatalf("exit %d, report %v, stderr %s", code, m, errs)
	}
	if strings.Count(errs, "\n") != 1 || !strings.Contains(errs, "declared permutation invariant but is not") {
		t.Fatalf("stderr %q", errs)
	}
}

// TestRefPlayExternalPolicy plays paddle with the stdlib example through
// the play command.
func TestRefPlayExternalPolicy(t *testing.T) {
	reftest.Need(t)
	code, out, errs := runCLI(t, "", "play", "--game", "paddle", "--episodes", "1", "--json",
		"--policy", "exec:"+reftest.Python+" "+filepath.Join(reftest.Root(), "examples", "policy_stdlib.py"))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var m map[string]any
	if err := json.Unmarshal([]byte(out), &m); err != nil || m["mean_return"].(float64) <= 0 {
		t.Fatalf("play output %s (%v)", out, err)
	}
	logs := t.TempDir()
	code, _, errs = runCLI(t, "", "play", "--game", "paddle", "--episodes", "1", "--policy-log", logs,
		"--policy", "exec:"+reftest.Python+" -c 'import sys; sys.stderr.write(\"model file missing\\n\"); sys.exit(4)'")
	if code != 1 || strings.Count(errs, "\n") != 1 || !strings.Contains(errs, "crash") || !strings.Contains(errs, "exit status 4") || !strings.Contains(errs, "model file missing") {
		t.Fatalf("crashing policy: exit %d %q", code, errs)
	}
	kept, _ := filepath.Glob(filepath.Join(logs, "*.stderr"))
	if len(kept) != 1 {
		t.Fatalf("stderr logs %v", kept)
	}
	if b, _ := os.ReadFile(kept[0]); !strings.Contains(string(b), "model file missing") {
		t.Fatalf("log %s holds %q", kept[0], b)
	}
}

// The text summary says when the network is untrained (a family name or
// fresh), and names a weights file's family alone.
func TestVerifyNamesUntrained(t *testing.T) {
	for _, c := range []struct{ policy, want string }{
		{"attention", "verify: attention (an untrained attention network) on paddle"},
		{"fresh", "verify: fresh (an untrained attention network) on paddle"},
	} {
		code, out, errs := runCLI(t, "", "verify", "--policy", c.policy, "--game", "paddle", "--perms", "2", "--seeds", "1", "--frames", "1")
		if code != 0 || !strings.HasPrefix(out, c.want) {
			t.Fatalf("%s: exit %d, stdout %q (stderr %s); want it to start %q", c.policy, code, out, errs, c.want)
		}
	}
}
