package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
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

// gridFlags are the options that describe the grid; --unscramble takes
// the grid from the manifest and refuses them, as it refuses the
// transform options.
var gridFlags = []string{"patch", "stride", "edge", "pad-value", "channels", "seed"}

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

// exportFlags are export's options.
type exportFlags struct {
	fs                                       *flag.FlagSet
	in, out, as, size, patch, stride, edge   *string
	unscramble                               *string
	frames, channels, sheetFrames, sheetCols *int
	maxPixels                                *int
	sheetScale                               *int
	padValue, fps                            *float64
	seed                                     *uint64
	crop, dither, sheetGrid, asJSON          *bool
	tf                                       *transformFlags
	ov                                       *overlayFlags
}

func addExportFlags(ctx *runContext) *exportFlags {
	fs := newFlags(ctx, "export", exportUsage)
	return &exportFlags{
		fs:          fs,
		in:          fs.String("in", "", "input frames: folder, .gif, .npy, .rgb/.raw, - (stdin) or builtin:NAME (e.g. --in frames/)"),
		out:         fs.String("out", "", "output folder `DIR` (required), created if missing (e.g. --out out/run1)"),
		as:          fs.String("as", "png", "comma-separated outputs: png, npy, gif, sheet (e.g. --as png,npy,gif,sheet)"),
		size:        fs.String("size", "", "frame size WxH of raw input, and of built-in scenes (default 96x96) (e.g. --size 160x120)"),
		frames:      fs.Int("frames", 60, "number of frames of a built-in scene (e.g. --frames 120)"),
		patch:       fs.String("patch", "8", "patch size N or WxH in pixels (e.g. --patch 8x6)"),
		stride:      fs.String("stride", "", "step between patches N or WxH; default the patch size, smaller overlaps (e.g. --stride 4)"),
		edge:        fs.String("edge", "pad", "when the patch does not divide the frame: pad, crop or strict (e.g. --edge crop)"),
		padValue:    fs.Float64("pad-value", 0, "grey level in [0,1] of the padding added by --edge pad (e.g. --pad-value 0.5)"),
		channels:    fs.Int("channels", 0, "token channels: 1 (grey, BT.601 luma) or 3; 0 takes the input's (e.g. --channels 1)"),
		tf:          addTransformFlags(fs, patch.Spec{Scramble: "none", Occlude: "none", Fill: "black"}),
		seed:        fs.Uint64("seed", 1, "seed of every random draw; the same seed gives the same bytes (e.g. --seed 7)"),
		unscramble:  fs.String("unscramble", "", "manifest.json of an earlier export: put the --in frames back in order (e.g. --unscramble OUT/manifest.json)"),
		crop:        fs.Bool("crop-to-source", false, "with --unscramble, crop the padded frames back to the source size (e.g. --crop-to-source)"),
		fps:         fs.Float64("fps", 10, "frames a second of the GIF, 1 to 100 (e.g. --fps 25)"),
		dither:      fs.Bool("dither", false, "GIF: Floyd–Steinberg dithering where the sequence has more than 256 colours, instead of the nearest colour of the palette built from the frames (e.g. --dither)"),
		sheetFrames: fs.Int("sheet-frames", 16, "most frames on the contact sheet, spread over the sequence (e.g. --sheet-frames 8)"),
		sheetCols:   fs.Int("sheet-columns", 4, "original/transformed pairs per row of the contact sheet (e.g. --sheet-columns 2)"),
		sheetScale:  fs.Int("sheet-scale", 2, "contact sheet pixel enlargement, 1 to 8 (e.g. --sheet-scale 3)"),
		sheetGrid:   fs.Bool("sheet-grid", false, "draw the patch grid on the contact sheet (e.g. --sheet-grid)"),
		maxPixels:   fs.Int("max-pixels", frameio.MaxFramePixels, "pixel budget: the largest frame (width·height) read, checked from each file's header before decoding (e.g. --max-pixels 100000000)"),
		asJSON:      fs.Bool("json", false, "print a machine-readable summary (\"format\": 1) on stdout (e.g. --json)"),
		ov:          addOverlayFlags(fs, true),
	}
}

// check makes the usage checks that need no input.
func (f *exportFlags) check() error {
	switch {
	case f.fs.NArg() > 0:
		return usagef("export: unexpected argument %q (options go before, as --name value)", f.fs.Arg(0))
	case *f.in == "":
		return usagef("export: --in is required (a folder, .gif, .npy, - or builtin:NAME)")
	case *f.out == "":
		return usagef("export: --out is required")
	case f.ov.on() && *f.unscramble != "":
		return usagef("export: --overlay does not go with --unscramble (no policy saw those frames)")
	case *f.crop && *f.unscramble == "":
		return usagef("export: --crop-to-source needs --unscramble")
	case !(*f.fps >= 1 && *f.fps <= 100):
		return usagef("export: --fps %v: want 1 to 100", *f.fps)
	case *f.sheetFrames < 1 || *f.sheetCols < 1:
		return usagef("export: --sheet-frames and --sheet-columns must be at least 1")
	case *f.sheetScale < 1 || *f.sheetScale > 8:
		return usagef("export: --sheet-scale %d: want 1 to 8", *f.sheetScale)
	case *f.frames < 1 || *f.frames > frameio.MaxFrames:
		return usagef("export: --frames %d: want 1 to %d", *f.frames, frameio.MaxFrames)
	case *f.channels != 0 && *f.channels != 1 && *f.channels != 3:
		return usagef("export: --channels %d: want 1 or 3", *f.channels)
	case math.IsNaN(*f.padValue) || *f.padValue < 0 || *f.padValue > 1:
		return usagef("export: --pad-value %v: want a number in [0,1]", *f.padValue)
	case *f.maxPixels < 1 || *f.maxPixels > frameio.MaxSide*frameio.MaxSide:
		return usagef("export: --max-pixels %d: want 1 to %d", *f.maxPixels, frameio.MaxSide*frameio.MaxSide)
	}
	return nil
}

// io returns how to read the input and what to write.
func (f *exportFlags) io(stdin io.Reader) (frameio.Options, frameio.OutputConfig, error) {
	formats, err := frameio.ParseFormats(*f.as)
	if err != nil {
		return frameio.Options{}, frameio.OutputConfig{}, usagef("export: --as: %v", err)
	}
	if f.ov.on() && slices.Contains(formats, frameio.AsNPY) {
		return frameio.Options{}, frameio.OutputConfig{}, usagef("export: --overlay draws on pictures; leave npy out of --as (the .npy holds what the policy saw, unmarked)")
	}
	opt := frameio.Options{Frames: *f.frames, Stdin: stdin, MaxPixels: *f.maxPixels}
	lower := strings.ToLower(*f.in)
	if *f.size != "" {
		if opt.Width, opt.Height, err = patch.ParseSize(*f.size); err != nil {
			return opt, frameio.OutputConfig{}, usagef("export: --size: %v", err)
		}
	} else if *f.in == "-" || strings.HasSuffix(lower, ".rgb") || strings.HasSuffix(lower, ".raw") {
		return opt, frameio.OutputConfig{}, usagef("export: raw RGB24 input needs --size WxH")
	}
	ocfg := frameio.OutputConfig{
		Dir: *f.out, Formats: formats, GIFDelay: int(math.Round(100 / *f.fps)), GIFDither: *f.dither,
		Sheet: frameio.SheetConfig{MaxFrames: *f.sheetFrames, Columns: *f.sheetCols, Scale: *f.sheetScale},
	}
	return opt, ocfg, nil
}

// exportJob is what export does: a transform (pipe set) or an inversion.
type exportJob struct {
	spec patch.Spec
	gcfg patch.GridConfig
	grid *patch.Grid
	pipe *patch.Pipeline
	man  *patch.Manifest
}

// plan reads the transform options, or the --unscramble manifest.
func (f *exportFlags) plan() (*exportJob, error) {
	j := &exportJob{}
	if *f.unscramble != "" {
		set := setFlags(f.fs)
		for _, n := range append(append([]string(nil), gridFlags...), f.tf.names()...) {
			if set[n] {
				return nil, usagef("export: --%s does not go with --unscramble (the manifest says how the frames were made)", n)
			}
		}
		man, err := patch.ReadManifestFile(*f.unscramble, nil)
		if err != nil {
			return nil, fmt.Errorf("export: %w", err)
		}
		j.man, j.grid, j.spec = man, man.GridOf(), man.Spec
		return j, nil
	}
	var err error
	if j.spec, err = f.tf.Spec(); err != nil {
		return nil, fmt.Errorf("export: %w", err)
	}
	if j.gcfg.PatchW, j.gcfg.PatchH, err = patch.ParseSize(*f.patch); err != nil {
		return nil, usagef("export: --patch: %v", err)
	}
	if *f.stride != "" {
		if j.gcfg.StrideX, j.gcfg.StrideY, err = patch.ParseSize(*f.stride); err != nil {
			return nil, usagef("export: --stride: %v", err)
		}
	}
	if j.gcfg.Edge, err = patch.ParseEdge(*f.edge); err != nil {
		return nil, usagef("export: --edge: %v", err)
	}
	j.gcfg.Fill = float32(*f.padValue)
	return j, nil
}

// bind fits the job to the input: the grid and pipeline of a transform,
// the invertibility check of an inversion.
func (j *exportJob) bind(f *exportFlags, info frameio.Info) error {
	if j.man != nil {
		if err := frameio.CheckInvertible(info, j.man); err != nil {
			return fmt.Errorf("export: %s: %w", *f.unscramble, err)
		}
		return nil
	}
	j.gcfg.Width, j.gcfg.Height, j.gcfg.Channels = info.Width, info.Height, info.Channels
	if *f.channels != 0 {
		j.gcfg.Channels = *f.channels
	}
	var err error
	if j.grid, err = patch.NewGrid(j.gcfg); err != nil {
		return usagef("export: %s: %v", info.Name, err)
	}
	if j.pipe, err = patch.NewPipeline(j.grid, j.spec); err != nil {
		return usagef("export: %v", err)
	}
	j.pipe.Reset(*f.seed)
	j.man = patch.NewManifest(j.grid, j.spec, *f.seed)
	return nil
}

func runExport(ctx *runContext, args []string) error {
	f := addExportFlags(ctx)
	if err := parseFlags(f.fs, args); err != nil {
		return err
	}
	if err := f.ov.parse("export"); err != nil {
		return err
	}
	if err := f.check(); err != nil {
		return err
	}
	opt, ocfg, err := f.io(ctx.stdin)
	if err != nil {
		return err
	}
	j, err := f.plan()
	if err != nil {
		return err
	}
	r, err := frameio.Open(*f.in, opt)
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	defer r.Close()
	info := r.Info()
	if err := j.bind(f, info); err != nil {
		return err
	}
	ocfg.Frames, ocfg.Channels = info.Frames, j.grid.Channels
	if *f.sheetGrid {
		ocfg.Sheet.Grid = j.grid
	}
	ow, oh := j.grid.OutW, j.grid.OutH
	if j.pipe == nil {
		ow, oh = frameio.InvertSize(j.man, *f.crop)
	}
	outs, err := frameio.NewOutputs(ocfg, ow, oh)
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	defer outs.Abort()
	n, err := j.run(ctx, f, r, outs, info.Frames)
	if err != nil {
		return err
	}
	files, err := outs.Commit()
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	sum := exportSummary{Format: 1, Command: "export", Mode: "transform", Input: info.Name, Frames: n,
		Source: sizeJSON{info.Width, info.Height, info.Channels}, Output: sizeJSON{ow, oh, j.grid.Channels},
		Grid: j.grid.String(), Spec: j.spec.String(), Seed: j.man.Seed, Dir: *f.out}
	return j.report(ctx, f, &sum, files)
}

// run sends the frames through the pipeline (or back) into outs.
func (j *exportJob) run(ctx *runContext, f *exportFlags, r frameio.Reader, outs *frameio.Outputs, frames int) (int, error) {
	bar := newProgress(ctx.stderr, frames, "export")
	var n int
	var err error
	switch {
	case j.pipe != nil && f.ov.on():
		n, err = runExportOverlay(f.ov, r, j.grid, j.pipe, j.man, outs, bar.Set)
	case j.pipe != nil:
		n, err = frameio.Transform(r, patch.NewTokenizer(j.grid), j.pipe, j.man, outs, bar.Set)
	default:
		n, err = frameio.Invert(r, j.man, *f.crop, outs, bar.Set)
	}
	bar.Done()
	if err != nil {
		if *f.unscramble != "" && strings.Contains(err.Error(), "manifest") {
			return n, fmt.Errorf("export: %s: %w", *f.unscramble, err)
		}
		return n, fmt.Errorf("export: %w", err)
	}
	return n, nil
}

// report writes the manifest of a transform and prints the outcome.
func (j *exportJob) report(ctx *runContext, f *exportFlags, sum *exportSummary, files []string) error {
	if j.pipe == nil {
		sum.Mode, sum.Manifest = "unscramble", *f.unscramble
	} else {
		mpath := filepath.Join(*f.out, "manifest.json")
		if err := j.man.WriteFile(mpath); err != nil {
			return fmt.Errorf("export: %w", err)
		}
		files = append(files, mpath)
		sum.Manifest = mpath
	}
	sum.Files = files
	if *f.asJSON {
		enc := json.NewEncoder(ctx.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(sum)
	}
	verb := "exported"
	if j.pipe == nil {
		verb = "restored"
	}
	fmt.Fprintf(ctx.stdout, "%s %d frames of %s (%dx%d → %dx%d, %s, %s) into %s: %s\n",
		verb, sum.Frames, sum.Input, sum.Source.Width, sum.Source.Height, sum.Output.Width, sum.Output.Height, j.grid, j.spec, *f.out, describeFiles(files))
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
