package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"tilebench/internal/reftest"
)

// Round trip bar: the trained PyTorch policy's mean return on held-out
// seeds as a share of the scripted expert's on the same seeds. Measured
// with this test's budget (docs/recording.md): see roundTripShare's log.
const (
	roundTripShare   = 0.70
	roundTripHeldOut = 10
	roundTripDemos   = 30
	roundTripDagger  = 8 // episodes per DAgger round
)

// roundTripRounds are the training rounds: behaviour cloning on the
// expert's demonstrations, then two DAgger rounds (the last model drives,
// the expert labels, and training goes on over everything recorded so
// far). Each runs a fixed number of epochs, so that the result does not
// depend on the machine's load, capped in time (150 s in all) to stay
// within 3 minutes with start-up on a busy machine. Measured without the
// caps binding: 99.7% of the expert after the third round (934.4 against
// 936.8 on 10 held-out seeds), 90% after the second; the bar leaves room
// for capped rounds on a loaded machine and for other PyTorch builds.
var roundTripRounds = []struct{ epochs, capSec int }{{4, 60}, {3, 45}, {3, 45}}

// playMean plays --episodes n from the first held-out seed and returns
// the episodes' returns and their mean.
func playMean(t *testing.T, game, policy string, n int) ([]float64, float64) {
	t.Helper()
	code, out, errs := runCLI(t, "", "play", "--game", game, "--episodes", strconv.Itoa(n), "--json",
		"--policy-timeout", "30s", "--policy-start-timeout", "2m", "--policy", policy)
	if code != 0 {
		t.Fatalf("play %s: exit %d: %s", policy, code, errs)
	}
	var s playSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	var rets []float64
	for _, e := range s.Episodes {
		rets = append(rets, e.Return)
	}
	return rets, s.Mean
}

// trainSeconds finds the training loop's seconds in torch_train.py's
// epoch lines ("epoch 3 loss 0.07 (62 s)").
var trainSeconds = regexp.MustCompile(`epoch \d+ loss \S+ \((\d+) s\)`)

// trainTorch runs examples/torch_train.py and returns the time its
// training loop took (as it reports it) and its wall time with start-up.
func trainTorch(t *testing.T, args ...string) (loop, wall time.Duration) {
	t.Helper()
	start := time.Now()
	cmd := exec.Command(reftest.Python, append([]string{filepath.Join(reftest.Root(), "examples", "torch_train.py")}, args...)...)
	cmd.Env = append(os.Environ(), "OMP_NUM_THREADS=1")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("torch_train.py %v: %v\n%s", args, err, out)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	t.Logf("torch_train.py: %s", strings.Join(lines[max(0, len(lines)-3):], " | "))
	m := trainSeconds.FindAllStringSubmatch(string(out), -1)
	if len(m) == 0 {
		t.Fatalf("torch_train.py printed no epoch line:\n%s", out)
	}
	secs, _ := strconv.Atoi(m[len(m)-1][1])
	return time.Duration(secs) * time.Second, time.Since(start)
}

// TestRefTorchRoundTrip is the PyTorch round trip of docs/recording.md,
// live: record the drive expert's demonstrations, train the example's
// patch-based policy by behaviour cloning (examples/torch_train.py, CPU),
// record two DAgger rounds (the trained policy drives over exec:, the
// expert labels), training on to each, then play it with tilebench play
// (exec:) on held-out seeds against the expert's mean return there, play
// it once more over TCP (examples/policy_torch.py --listen) and check
// the same return, and run a small stress study on it. Everything reads
// the game's Spec (frame size, action kind, dimension, bounds) from the
// recording, so the test holds whatever the game's numbers.
func TestRefTorchRoundTrip(t *testing.T) {
	if testing.Short() {
		t.Skip("the PyTorch round trip trains for minutes")
	}
	reftest.Need(t, "numpy", "torch")
	dir := t.TempDir()
	py := reftest.Python
	serve := filepath.Join(reftest.Root(), "examples", "policy_torch.py")
	demos := filepath.Join(dir, "demos")

	if code, _, errs := runCLI(t, "", "record", "--game", "drive", "--episodes", strconv.Itoa(roundTripDemos), "--out", demos); code != 0 {
		t.Fatalf("record: exit %d: %s", code, errs)
	}
	var took, wall time.Duration
	data := []string{"--data", demos}
	model := ""
	for i, r := range roundTripRounds {
		if i > 0 {
			// The last model drives on other training seeds; the expert labels.
			dagger := filepath.Join(dir, fmt.Sprintf("dagger%d", i))
			if code, _, errs := runCLI(t, "", "record", "--game", "drive", "--episodes", strconv.Itoa(roundTripDagger),
				"--seed", strconv.Itoa(1000*i), "--relabel", "--policy-timeout", "30s",
				"--policy", "exec:"+py+" "+serve+" --model "+model, "--out", dagger); code != 0 {
				t.Fatalf("record --relabel: exit %d: %s", code, errs)
			}
			data = append(data, "--data", dagger)
		}
		next := filepath.Join(dir, fmt.Sprintf("m%d.pt", i+1))
		args := append(append([]string{}, data...), "--patch", "12", "--epochs", strconv.Itoa(r.epochs),
			"--time-limit", strconv.Itoa(r.capSec), "--out", next)
		if model != "" {
			args = append(args, "--init", model)
		}
		loop, w := trainTorch(t, args...)
		took, wall = took+loop, wall+w
		model = next
	}
	// The training loops are what the 3 minutes bound; start-up (Python,
	// PyTorch, reading the recordings) comes on top and grows with the
	// machine's load.
	if took > 3*time.Minute {
		t.Errorf("training took %v in all, over the 3 minutes allowed", took)
	}

	policy := "exec:" + py + " " + serve + " --model " + model
	_, expert := playMean(t, "drive", "expert", roundTripHeldOut)
	rets, got := playMean(t, "drive", policy, roundTripHeldOut)
	share := got / expert
	t.Logf("torch policy %.1f, expert %.1f on %d held-out seeds: %.0f%% of the expert (bar %.0f%%); training %v (%v with start-up)",
		got, expert, roundTripHeldOut, 100*share, 100*roundTripShare, took, wall.Round(time.Second))
	if expert <= 0 || share < roundTripShare {
		t.Fatalf("torch policy reaches %.0f%% of the expert's mean return, want at least %.0f%%", 100*share, 100*roundTripShare)
	}

	// The same model over TCP: the same first episode, to the bit.
	srv := exec.Command(py, serve, "--model", model, "--listen", "127.0.0.1:0", "--sessions", "1")
	srv.Env = append(os.Environ(), "OMP_NUM_THREADS=1")
	stderr, err := srv.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := srv.Start(); err != nil {
		t.Fatal(err)
	}
	defer func() { srv.Process.Kill(); srv.Wait() }()
	line, err := bufio.NewReader(stderr).ReadString('\n')
	addr, ok := strings.CutPrefix(strings.TrimSpace(line), "policy_torch: listening on ")
	if err != nil || !ok {
		t.Fatalf("server said %q (%v)", line, err)
	}
	tcp, _ := playMean(t, "drive", "tcp://"+addr, 1)
	if tcp[0] != rets[0] {
		t.Errorf("over tcp the first held-out episode returns %v, over exec %v", tcp[0], rets[0])
	}

	// A small stress study of the trained policy.
	out := filepath.Join(dir, "stress")
	code, _, errs := runCLI(t, "", "stress", "--game", "drive", "--patch", "8", "--occlude", "none,random:0.3", "--episodes", "2",
		"--resamples", "200", "--json", "--policy-timeout", "30s", "--policy", policy, "--out", out)
	if code != 0 {
		t.Fatalf("stress: exit %d: %s", code, errs)
	}
	b, err := os.ReadFile(filepath.Join(out, "results.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(string(b), "\n"); n != 4 {
		t.Fatalf("stress recorded %d episodes, want 2 cells × 2", n)
	}
	if _, err := os.Stat(filepath.Join(out, "report.html")); err != nil {
		t.Fatal(err)
	}
}
