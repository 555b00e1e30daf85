package analysis

import (
	"fmt"

	"tilebench/vision/overlay"
	"tilebench/vision/report"
)

// addLegend ends a strip drawn with an overlay with the overlay's key.
func addLegend(st *report.Strip, dir string, cells []int) {
	for _, c := range cells {
		_, m := LoadStrip(dir, c)
		if m == nil || m.Overlay == "" {
			continue
		}
		st.Frames = append(st.Frames, report.Frame{Label: "key: dim → amber, ringed = most attended", Image: overlay.Legend(8)})
		st.Caption += fmt.Sprintf(" Overlay %s: each patch is dimmed by how little attention the policy gave it and washed amber by how much; ringed patches drew the most.", m.Overlay)
		return
	}
}
