package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"tilebench/patch"
	"tilebench/patch/frameio"
)

const exportUsage = `export --in FRAMES --out DIR [options]

Cuts each frame into patches (after --corrupt's camera and image
corruptions, if any), runs the transform pipeline on the tokens
(scramble, occlude, extra tokens, photometric shifts) and writes the frames
as the policy sees them, with a manifest that inverts or replays every
transform. With --unscramble it reads frames it exported before and puts
their tokens back in order.

FRAMES is a folder of .png/.jpg frames (natural order: f2 before f10), a
.gif, a .npy (uint8 T×H×W×C, H×W×C or T×H×W), a .rgb/.raw file or - (raw
RGB24 frames on stdin, needs --size WxH), or builtin:drift / builtin:checker.

Outputs in DIR (--as): frame-NNNNN.png (png), frames.npy (npy, uint8
T×H×W×C), frames.gif (gif), sheet.png (sheet: original beside transformed),
and manifest.json. Files appear only when the whole sequence went through.

examples:
  tilebench export --in builtin:drift --patch 8 --scramble full --out out/drift --as png,gif,sheet
  tilebench export --in FRAMES_DIR --patch 8 --edge pad --scramble full --every 0 --occlude random:0.25 --fill black --seed 7 --out OUT --as png,npy,gif,sheet
  tilebench export --in OUT/frames.npy --unscramble OUT/manifest.json --out BACK --as npy
  tilebench export --in movie.gif --patch 6 --scramble local:1 --every 10 --occlude sweep:0.3 --out OUT2 --as gif
  DECODER clip.mp4 | tilebench export --in - --size 160x120 --patch 8 --out OUT3 --as npy
    (DECODER: any video decoder writing raw 24-bit RGB frames to stdout)

options:`

// transformFlags are the options that describe a pipeline; --unscramble
// takes its pipeline from the manifest and refuses them.
var transformFlags = []string{"patch", "stride", "edge", "pad-value", "channels", "scramble", "every", "rotate", "flip",
	"occlude", "fill", "noise-tokens", "duplicates", "brightness", "contrast", "shift", "pixel-noise", "corrupt", "seed"}

func init() {
	register(&command{name: "export", summary: "write scrambled/occluded frame sequences (png, npy, gif, contact sheet) and their manifest", run: runExport})
}

// exportSummary is the --json output.
type exportSummary struct {
	Format   int      `json:"format"`
	Command  string   `json:"command"`
	Mode     string   `json:"mode"`
	Input    string   `json:"input"`
	Frames   int      `json:"frames"`
	Source   sizeJSON `json:"source"`
	Output   sizeJSON `json:"output"`
	Grid     string   `json:"grid"`
	Spec     string   `json:"spec"`
	Seed     uint64   `json:"seed"`
	Dir      string   `json:"dir"`
	Files    []string `json:"files"`
	Manifest string   `json:"manifest"`
}

type sizeJSON struct {
	Width    int `json:"width"`
	Height   int `json:"height"`
	Channels int `json:"channels"`
}

func runExport(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "export", exportUsage)
	in := fs.String("in", "", "input frames: folder, .gif, .npy, .rgb/.raw, - (stdin) or builtin:NAME (e.g. --in frames/)")
	out := fs.String("out", "", "output folder, created if missing (e.g. --out out/run1)")
	as := fs.String("as", "png", "comma-separated outputs: png, npy, gif, sheet (e.g. --as png,npy,gif,sheet)")
	size := fs.String("size", "", "frame size WxH of raw input, and of built-in scenes (default 96x96) (e.g. --size 160x120)")
	nframes := fs.Int("frames", 60, "number of frames of a built-in scene (e.g. --frames 120)")
	patchSz := fs.String("patch", "8", "patch size N or WxH in pixels (e.g. --patch 8x6)")
	stride := fs.String("stride", "", "step between patches N or WxH; default the patch size, smaller overlaps (e.g. --stride 4)")
	edge := fs.String("edge", "pad", "when the patch does not divide the frame: pad, crop or strict (e.g. --edge crop)")
	padValue := fs.Float64("pad-value", 0, "grey level in [0,1] of the padding added by --edge pad (e.g. --pad-value 0.5)")
	channels := fs.Int("channels", 0, "token channels: 1 (grey, BT.601 luma) or 3; 0 takes the input's (e.g. --channels 1)")
	scramble := fs.String("scramble", "none", "token order: none, full, partial:F or local:K (e.g. --scramble partial:0.5)")
	every := fs.Int("every", 0, "draw a new permutation every T frames; 0 draws one for the whole sequence (e.g. --every 10)")
	rotate := fs.Bool("rotate", false, "also turn each patch by a random multiple of 90° (square patches) (e.g. --rotate)")
	flip := fs.Bool("flip", false, "also mirror each patch at random (e.g. --flip)")
	occlude := fs.String("occlude", "none", "hide tokens: none, random:R, block:R, bands:R, sweep:R or mask:FILE.png (e.g. --occlude block:0.3)")
	fill := fs.String("fill", "black", "what an occluded token becomes: black, mean, noise or drop (e.g. --fill noise)")
	noiseTokens := fs.Int("noise-tokens", 0, "add K tokens of uniform noise (not drawn in frames) (e.g. --noise-tokens 4)")
	dups := fs.Int("duplicates", 0, "add K copies of random tokens (e.g. --duplicates 2)")
	brightness := fs.Float64("brightness", 0, "add this to every value, in [-1,1] (e.g. --brightness 0.1)")
	contrast := fs.Float64("contrast", 1, "scale values about 0.5 by this factor (e.g. --contrast 1.5)")
	shift := fs.String("shift", "", "per-channel shift R,G,B, each in [-1,1] (e.g. --shift 0.1,0,-0.1)")
	pixelNoise := fs.Float64("pixel-noise", 0, "standard deviation of Gaussian noise added to every value (e.g. --pixel-noise 0.05)")
	corrupt := fs.String("corrupt", "", corruptFlagHelp)
	seed := fs.Uint64("seed", 1, "seed of every random draw; the same seed gives the same bytes (e.g. --seed 7)")
	unscramble := fs.String("unscramble", "", "manifest.json of an earlier export: put the --in frames back in order (e.g. --unscramble OUT/manifest.json)")
	crop := fs.Bool("crop-to-source", false, "with --unscramble, crop the padded frames back to the source size (e.g. --crop-to-source)")
	fps := fs.Float64("fps", 10, "frames a second of the GIF, 1 to 100 (e.g. --fps 25)")
	dither := fs.Bool("dither", false, "GIF: Floyd–Steinberg dithering (slower) instead of the nearest colour of the fixed colour cube (e.g. --dither)")
	sheetFrames := fs.Int("sheet-frames", 16, "most frames on the contact sheet, spread over the sequence (e.g. --sheet-frames 8)")
	sheetCols := fs.Int("sheet-columns", 4, "original/transformed pairs per row of the contact sheet (e.g. --sheet-columns 2)")
	sheetScale := fs.Int("sheet-scale", 2, "contact sheet pixel enlargement, 1 to 8 (e.g. --sheet-scale 3)")
	sheetGrid := fs.Bool("sheet-grid", false, "draw the patch grid on the contact sheet (e.g. --sheet-grid)")
	asJSON := fs.Bool("json", false, "print a machine-readable summary (\"format\": 1) on stdout (e.g. --json)")
	maxPixels := fs.Int("max-pixels", frameio.MaxFramePixels, "pixel budget: the largest frame (width·height) read, checked from each file's header before decoding (e.g. --max-pixels 100000000)")
	ov := addOverlayFlags(fs, true)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := ov.parse("export"); err != nil {
		return err
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })

	// Usage checks that need no input.
	switch {
	case fs.NArg() > 0:
		return usagef("export: unexpected argument %q (options go before, as --name value)", fs.Arg(0))
	case *in == "":
		return usagef("export: --in is required (a folder, .gif, .npy, - or builtin:NAME)")
	case *out == "":
		return usagef("export: --out is required")
	case ov.on() && *unscramble != "":
		return usagef("export: --overlay does not go with --unscramble (no policy saw those frames)")
	case *crop && *unscramble == "":
		return usagef("export: --crop-to-source needs --unscramble")
	case !(*fps >= 1 && *fps <= 100):
		return usagef("export: --fps %v: want 1 to 100", *fps)
	case *sheetFrames < 1 || *sheetCols < 1:
		return usagef("export: --sheet-frames and --sheet-columns must be at least 1")
	case *sheetScale < 1 || *sheetScale > 8:
		return usagef("export: --sheet-scale %d: want 1 to 8", *sheetScale)
	case *nframes < 1 || *nframes > frameio.MaxFrames:
		return usagef("export: --frames %d: want 1 to %d", *nframes, frameio.MaxFrames)
	case *channels != 0 && *channels != 1 && *channels != 3:
		return usagef("export: --channels %d: want 1 or 3", *channels)
	case math.IsNaN(*padValue) || *padValue < 0 || *padValue > 1:
		return usagef("export: --pad-value %v: want a number in [0,1]", *padValue)
	case *maxPixels < 1 || *maxPixels > frameio.MaxSide*frameio.MaxSide:
		return usagef("export: --max-pixels %d: want 1 to %d", *maxPixels, frameio.MaxSide*frameio.MaxSide)
	}
	formats, err := frameio.ParseFormats(*as)
	if err != nil {
		return usagef("export: --as: %v", err)
	}
	if ov.on() && slices.Contains(formats, frameio.AsNPY) {
		return usagef("export: --overlay draws on pictures; leave npy out of --as (the .npy holds what the policy saw, unmarked)")
	}
	opt := frameio.Options{Frames: *nframes, Stdin: ctx.stdin, MaxPixels: *maxPixels}
	if *size != "" {
		if opt.Width, opt.Height, err = patch.ParseSize(*size); err != nil {
			return usagef("export: --size: %v", err)
		}
	} else if *in == "-" || strings.HasSuffix(strings.ToLower(*in), ".rgb") || strings.HasSuffix(strings.ToLower(*in), ".raw") {
		return usagef("export: raw RGB24 input needs --size WxH")
	}
	ocfg := frameio.OutputConfig{
		Dir: *out, Formats: formats, GIFDelay: int(math.Round(100 / *fps)), GIFDither: *dither,
		Sheet: frameio.SheetConfig{MaxFrames: *sheetFrames, Columns: *sheetCols, Scale: *sheetScale},
	}

	var (
		spec patch.Spec
		g    *patch.Grid
		p    *patch.Pipeline
		man  *patch.Manifest
	)
	if *unscramble != "" {
		for _, n := range transformFlags {
			if set[n] {
				return usagef("export: --%s does not go with --unscramble (the manifest says how the frames were made)", n)
			}
		}
		if man, err = patch.ReadManifestFile(*unscramble, nil); err != nil {
			return fmt.Errorf("export: %w", err)
		}
		g, spec = man.GridOf(), man.Spec
	} else {
		spec = patch.Spec{Scramble: *scramble, Every: *every, Rotate: *rotate, Flip: *flip, Occlude: *occlude, Fill: *fill,
			NoiseTokens: *noiseTokens, Duplicates: *dups, Brightness: *brightness, Contrast: *contrast, PixelNoise: *pixelNoise,
			Corrupt: *corrupt}
		if spec.Contrast == 1 {
			spec.Contrast = 0 // the Spec's spelling of "unchanged"
		}
		if *shift != "" {
			if spec.Shift, err = patch.ParseShift(*shift); err != nil {
				return usagef("export: --shift: %v", err)
			}
		}
		if err := spec.Check(); err != nil {
			return usagef("export: %v", err)
		}
	}
	var gcfg patch.GridConfig
	if man == nil {
		if gcfg.PatchW, gcfg.PatchH, err = patch.ParseSize(*patchSz); err != nil {
			return usagef("export: --patch: %v", err)
		}
		if *stride != "" {
			if gcfg.StrideX, gcfg.StrideY, err = patch.ParseSize(*stride); err != nil {
				return usagef("export: --stride: %v", err)
			}
		}
		if gcfg.Edge, err = patch.ParseEdge(*edge); err != nil {
			return usagef("export: --edge: %v", err)
		}
		gcfg.Fill = float32(*padValue)
		if m, ok := strings.CutPrefix(spec.Occlude, "mask:"); ok {
			if _, err := os.Stat(m); err != nil {
				return fmt.Errorf("export: occlude mask %s: %v", m, err)
			}
		}
	}

	// The input: its size is needed for the grid.
	r, err := frameio.Open(*in, opt)
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	defer r.Close()
	info := r.Info()
	if man == nil {
		gcfg.Width, gcfg.Height, gcfg.Channels = info.Width, info.Height, info.Channels
		if *channels != 0 {
			gcfg.Channels = *channels
		}
		if g, err = patch.NewGrid(gcfg); err != nil {
			return usagef("export: %s: %v", info.Name, err)
		}
		if p, err = patch.NewPipeline(g, spec); err != nil {
			return usagef("export: %v", err)
		}
		p.Reset(*seed)
		man = patch.NewManifest(g, spec, *seed)
	} else if err := frameio.CheckInvertible(info, man); err != nil {
		return fmt.Errorf("export: %s: %w", *unscramble, err)
	}
	ocfg.Frames, ocfg.Channels = info.Frames, g.Channels
	if *sheetGrid {
		ocfg.Sheet.Grid = g
	}
	ow, oh := g.OutW, g.OutH
	if p == nil {
		ow, oh = frameio.InvertSize(man, *crop)
	}
	outs, err := frameio.NewOutputs(ocfg, ow, oh)
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	defer outs.Abort()

	bar := newProgress(ctx.stderr, info.Frames, "export")
	var n int
	switch {
	case p != nil && ov.on():
		n, err = runExportOverlay(ov, r, g, p, man, outs, bar.Set)
	case p != nil:
		n, err = frameio.Transform(r, patch.NewTokenizer(g), p, man, outs, bar.Set)
	default:
		n, err = frameio.Invert(r, man, *crop, outs, bar.Set)
	}
	bar.Done()
	if err != nil {
		if *unscramble != "" && strings.Contains(err.Error(), "manifest") {
			return fmt.Errorf("export: %s: %w", *unscramble, err)
		}
		return fmt.Errorf("export: %w", err)
	}
	files, err := outs.Commit()
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	sum := exportSummary{Format: 1, Command: "export", Mode: "transform", Input: info.Name, Frames: n,
		Source: sizeJSON{info.Width, info.Height, info.Channels}, Output: sizeJSON{ow, oh, g.Channels},
		Grid: g.String(), Spec: spec.String(), Seed: man.Seed, Dir: *out}
	if p == nil {
		sum.Mode, sum.Manifest = "unscramble", *unscramble
	} else {
		mpath := filepath.Join(*out, "manifest.json")
		if err := man.WriteFile(mpath); err != nil {
			return fmt.Errorf("export: %w", err)
		}
		files = append(files, mpath)
		sum.Manifest = mpath
	}
	sum.Files = files
	if *asJSON {
		enc := json.NewEncoder(ctx.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(sum)
	}
	verb := "exported"
	if p == nil {
		verb = "restored"
	}
	fmt.Fprintf(ctx.stdout, "%s %d frames of %s (%dx%d → %dx%d, %s, %s) into %s: %s\n",
		verb, n, info.Name, info.Width, info.Height, ow, oh, g, spec, *out, describeFiles(files))
	return nil
}

// describeFiles names the written files briefly: "frames.npy, sheet.png,
// 60 PNG frames, manifest.json".
func describeFiles(files []string) string {
	var parts []string
	pngs := 0
	for _, f := range files {
		b := filepath.Base(f)
		if strings.HasPrefix(b, "frame-") {
			pngs++
			continue
		}
		parts = append(parts, b)
	}
	if pngs > 0 {
		parts = append(parts, fmt.Sprintf("%d PNG frames", pngs))
	}
	return strings.Join(parts, ", ")
}
