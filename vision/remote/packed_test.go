package remote

import (
	"errors"
	"hash/fnv"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/vision"
)

// hashPolicy answers with a hash of every byte of the frame it was
// sent, so that any byte sent wrong shows in the action.
type hashPolicy struct{}

func (hashPolicy) Info() vision.Info { return vision.Info{Family: "hash", WantsFrame: true} }
func (hashPolicy) Reset(uint64)      {}
func (hashPolicy) Act(obs *vision.Observation, a []float64) error {
	h := fnv.New64a()
	h.Write(obs.Frame.Pix)
	v := h.Sum64()
	a[0] = float64(v%2001)/1000 - 1
	a[1] = float64((v>>20)%2001)/1000 - 1
	return nil
}

// packRGBA is the test's own packing of an RGBA frame into RGB bytes
// (three of every four bytes, in order), written apart from packRGB.
func packRGBA(pix []byte) []byte {
	out := make([]byte, 0, len(pix)/4*3)
	for i := 0; i < len(pix); i += 4 {
		out = append(out, pix[i], pix[i+1], pix[i+2])
	}
	return out
}

// TestPackedSameAsFrames: frames sent as packed bytes, in FrameBuffer's
// room or from a buffer of the caller's, give exactly the actions of the
// same frames sent as RGBA observations, one by one and in batches.
func TestPackedSameAsFrames(t *testing.T) {
	obs := observations(t, 11, ObsFrame)
	cfg := Config{Game: (&blobs{}).Spec(), Grid: testGrid(t), Obs: ObsFrame, Dtype: Uint8}
	acts := func() [][]float64 {
		a := make([][]float64, len(obs))
		for i := range a {
			a[i] = make([]float64, 2)
		}
		return a
	}
	ref, err := Open(serveTCP(t, hashPolicy{}, ServeOptions{}), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer ref.Close()
	want := acts()
	for i, o := range obs {
		if err := ref.Act(o, want[i]); err != nil {
			t.Fatal(err)
		}
	}
	fb := 32 * 24 * 3
	for _, batch := range []int{0, 4} {
		for _, inPlace := range []bool{true, false} {
			p, err := Open(serveTCP(t, hashPolicy{}, ServeOptions{Batch: batch}), cfg)
			if err != nil {
				t.Fatal(err)
			}
			if shape, ok := p.PackedFrame(); !ok || shape != [3]int{24, 32, 3} {
				t.Fatalf("PackedFrame %v %v", shape, ok)
			}
			got := acts()
			k := max(1, p.BatchSize())
			if p.FrameBuffer(k+1) != nil || p.FrameBuffer(0) != nil {
				t.Fatal("FrameBuffer gave room past the batch size")
			}
			for i := 0; i < len(obs); i += k {
				j := min(i+k, len(obs))
				var buf []byte
				if inPlace {
					buf = p.FrameBuffer(j - i)
					if len(buf) != (j-i)*fb {
						t.Fatalf("FrameBuffer(%d): %d bytes", j-i, len(buf))
					}
				} else {
					buf = make([]byte, (j-i)*fb)
				}
				for m := i; m < j; m++ {
					copy(buf[(m-i)*fb:], packRGBA(obs[m].Frame.Pix))
				}
				// The observations carry no frame: the packed bytes are sent.
				bare := make([]*vision.Observation, j-i)
				for m := range bare {
					o := *obs[i+m]
					o.Frame = nil
					bare[m] = &o
				}
				if batch > 1 {
					err = p.ActBatchPacked(bare, buf, got[i:j])
				} else {
					err = p.ActPacked(bare[0], buf, got[i])
				}
				if err != nil {
					t.Fatal(err)
				}
			}
			for i := range want {
				if want[i][0] != got[i][0] || want[i][1] != got[i][1] {
					t.Errorf("batch %d, in place %v, frame %d: packed %v, RGBA %v", batch, inPlace, i, got[i], want[i])
				}
			}
			// A buffer of the wrong length is refused before anything is sent.
			if err := p.ActPacked(obs[0], make([]byte, fb-1), got[0]); err == nil || !strings.Contains(err.Error(), "packed frames") {
				t.Errorf("short packed frame: %v", err)
			}
			if err := p.Act(obs[0], got[0]); err != nil {
				t.Errorf("the session after a refused packed frame: %v", err)
			}
			p.Close()
		}
	}
	tok, err := Open(serveTCP(t, hashPolicy{}, ServeOptions{}), Config{Game: (&blobs{}).Spec(), Grid: testGrid(t), Obs: ObsTokens})
	if err != nil {
		t.Fatal(err)
	}
	defer tok.Close()
	if _, ok := tok.PackedFrame(); ok || tok.FrameBuffer(1) != nil {
		t.Error("a tokens session offers packed frames")
	}
	if err := tok.ActPacked(obs[0], make([]byte, fb), want[0]); err == nil {
		t.Error("a tokens session took a packed frame")
	}
}

// TestBatchFile: frames stored in a file give, through ActBatchFile,
// exactly the actions of the same frames sent as RGBA observations, over
// exec: (spliced into the child's pipe on Linux) and over tcp:// (read,
// then written); a file cut short is an IO fault.
func TestBatchFile(t *testing.T) {
	obs := observations(t, 11, ObsFrame)
	cfg := Config{Game: (&blobs{}).Spec(), Grid: testGrid(t), Obs: ObsFrame, Dtype: Uint8}
	ref, err := Open(serveTCP(t, hashPolicy{}, ServeOptions{}), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer ref.Close()
	want := make([][]float64, len(obs))
	for i, o := range obs {
		want[i] = make([]float64, 2)
		if err := ref.Act(o, want[i]); err != nil {
			t.Fatal(err)
		}
	}
	// The frames after a header of 13 bytes, as a .npy file keeps them
	// after its header.
	data := []byte("not a frame..")
	for _, o := range obs {
		data = append(data, packRGBA(o.Frame.Pix)...)
	}
	path := filepath.Join(t.TempDir(), "frames.bin")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	fb := 32 * 24 * 3
	execCfg := cfg
	execCfg.Env = []string{helperEnv + "=hashbatch"}
	for _, c := range []struct {
		name, target string
		cfg          Config
	}{{"exec", helperTarget(t), execCfg}, {"tcp", serveTCP(t, hashPolicy{}, ServeOptions{Batch: 4}), cfg}} {
		p, err := Open(c.target, c.cfg)
		if err != nil {
			t.Fatal(err)
		}
		got := make([][]float64, len(obs))
		for i := range got {
			got[i] = make([]float64, 2)
		}
		for i := 0; i < len(obs); i += 4 {
			j := min(i+4, len(obs))
			bare := make([]*vision.Observation, j-i)
			for m := range bare {
				o := *obs[i+m]
				o.Frame = nil
				bare[m] = &o
			}
			if err := p.ActBatchFile(bare, f, int64(13+i*fb), got[i:j]); err != nil {
				t.Fatalf("%s: %v", c.name, err)
			}
		}
		for i := range want {
			if want[i][0] != got[i][0] || want[i][1] != got[i][1] {
				t.Errorf("%s frame %d: from the file %v, as RGBA %v", c.name, i, got[i], want[i])
			}
		}
		// Frames past the end of the file: a fault, and the session ends.
		err = p.ActBatchFile(obs[:4], f, int64(13+9*fb), got[:4])
		var fe *FaultError
		if !errors.As(err, &fe) {
			t.Errorf("%s: frames past the end of the file: %v, want a fault", c.name, err)
		}
		p.Close()
	}
}
