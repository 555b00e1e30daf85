package study

// DefaultStressSet is the stress set a sizes study evaluates every patch
// size under when no axes are given: clean, random occlusion of a quarter
// and of half the tokens, each with and without a full scramble.
var DefaultStressSet = Axes{Occlude: Axis{"none,random:0.25,random:0.5"}, Scramble: Axis{"none,full"}}

// Patches lists the study's patch sizes in order.
func (p *Plan) Patches() []int {
	var out []int
	seen := map[int]bool{}
	for _, c := range p.Cells {
		if !seen[c.Patch] {
			seen[c.Patch] = true
			out = append(out, c.Patch)
		}
	}
	return out
}
