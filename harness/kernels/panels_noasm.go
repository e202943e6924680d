//go:build !amd64 || noasm

package kernels

// panelDot4 sets acc[PanelRows·q+i] = Σ_k x[k]·P[k][i] over the panels
// P = panels[q] of w, k ascending, each product rounded before it is added.
func panelDot4(acc *[panelGroup * PanelRows]float32, x []float32, w *Mat, panels *[panelGroup]int) {
	panelDot4Go(acc, x, w, panels)
}

// panelDot4At continues acc by Σ_j x[j]·P[k0+j][i] over the panels
// P = panels[q] of w (panelDot4AtGo).
func panelDot4At(acc *[panelGroup * PanelRows]float32, x []float32, w *Mat, panels *[panelGroup]int, k0 int) {
	panelDot4AtGo(acc, x, w, panels, k0)
}

// panelKernel names the panel kernel used for w's dtype.
func panelKernel(DType) string { return "go 4-panel" }

// panelDot4Idx has no portable kernel: the caller goes run by run.
func panelDot4Idx(*[panelGroup * PanelRows]float32, []float32, []int32, *Mat, *[panelGroup]int) bool {
	return false
}

// panelIndexed is false in the portable build.
func panelIndexed(DType) bool { return false }
