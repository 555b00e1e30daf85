package main

import (
	"flag"
	"image"

	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/overlay"
	"tilebench/vision/policies"
)

// overlayFlags are --overlay (and, for export, the --weights whose
// attention is drawn; export runs no other policy, so it does not take
// the --policy grammar).
type overlayFlags struct {
	spec   string
	policy *string // export only
	parsed overlay.Spec
}

// addOverlayFlags registers --overlay on fs, and --weights when withPolicy
// (export, which otherwise runs no policy).
func addOverlayFlags(fs *flag.FlagSet, withPolicy bool) *overlayFlags {
	o := &overlayFlags{}
	fs.StringVar(&o.spec, "overlay", "none", "draw the policy's attention over the frames it saw: none, attention (heat), top:K (outline the K most attended patches) or attention+top:K (e.g. --overlay attention+top:3)")
	if withPolicy {
		o.policy = fs.String("weights", "", "with --overlay: the weights FILE.safetensors whose attention is drawn (e.g. --weights drive-p8.safetensors)")
	}
	return o
}

// parse checks the flags; cmd names the command for messages.
func (o *overlayFlags) parse(cmd string) error {
	sp, err := overlay.Parse(o.spec)
	if err != nil {
		return usagef("%s: --overlay: %v", cmd, err)
	}
	o.parsed = sp
	if o.policy != nil {
		switch {
		case sp.On() && *o.policy == "":
			return usagef("%s: --overlay needs --weights FILE.safetensors (the policy whose attention is drawn)", cmd)
		case !sp.On() && *o.policy != "":
			return usagef("%s: --weights is used only with --overlay", cmd)
		case sp.On() && policies.Kind(*o.policy) != policies.KindFile:
			return usagef("%s: --weights %q: export draws the attention of a weights file (.safetensors); use play or watch for other policies", cmd, *o.policy)
		}
	}
	return nil
}

// on reports whether an overlay is asked for.
func (o *overlayFlags) on() bool { return o.parsed.On() }

// exportPolicy loads the weights file for frames cut on g.
func (o *overlayFlags) exportPolicy(g *patch.Grid) (nets.Net, error) {
	n, err := nets.Load(*o.policy)
	if err != nil {
		return nil, err
	}
	ng := n.Grid()
	if ng.Cols != g.Cols || ng.Rows != g.Rows || ng.D() != g.D() {
		return nil, usagef("--weights %s was trained on %s; these frames are cut as %s (match --patch and the frame size, set by --size for built-in scenes)", *o.policy, ng, g)
	}
	if _, ok := n.(vision.AttentionReporter); !ok {
		return nil, usagef("--weights %s is a %s policy, which has no attention to draw", *o.policy, n.Config().Family)
	}
	return n, nil
}

// runExportOverlay is the transform loop of export with the policy's
// attention drawn.
func runExportOverlay(o *overlayFlags, r frameio.Reader, g *patch.Grid, p *patch.Pipeline, man *patch.Manifest, outs *frameio.Outputs, progress func(int)) (int, error) {
	n, err := o.exportPolicy(g)
	if err != nil {
		return 0, err
	}
	return overlay.Export(r, patch.NewTokenizer(g), p, man, outs, n, n.Space().Dim(), o.parsed, progress)
}

// painter draws the overlay on copies of the frames play records.
type painter struct {
	spec    overlay.Spec
	rep     vision.AttentionReporter
	d       overlay.Drawer
	weights []float32
	cells   []float32
	img     *image.RGBA
}

// newPainter returns nil when no overlay is asked for, and a usage error
// when the policy reports no weights.
func (o *overlayFlags) newPainter(cmd string, pol vision.Policy, policy string) (*painter, error) {
	if !o.on() {
		return nil, nil
	}
	rep, ok := pol.(vision.AttentionReporter)
	if !ok {
		return nil, usagef("%s: --overlay: policy %s reports no attention weights (attention families and external policies that send weights do)", cmd, policy)
	}
	return &painter{spec: o.parsed, rep: rep}, nil
}

// seen returns the frame the policy saw with its attention drawn, or the
// frame itself when it gave no weights this step.
func (p *painter) seen(obs *vision.Observation) *image.RGBA {
	if cap(p.weights) < obs.Tokens.Cap() {
		p.weights = make([]float32, obs.Tokens.Cap())
		p.cells = make([]float32, obs.Grid.N())
	}
	_, n, ok := p.rep.TokenWeights(p.weights, nil)
	if !ok || n != obs.Tokens.N {
		return obs.Frame
	}
	if p.img == nil || p.img.Rect != obs.Frame.Rect {
		p.img = image.NewRGBA(obs.Frame.Rect)
	}
	copy(p.img.Pix, obs.Frame.Pix)
	overlay.SeenCells(p.cells, p.weights[:n], obs.Tokens.Pos, obs.Grid)
	p.d.Draw(p.img, obs.Grid, p.cells, p.spec)
	return p.img
}
