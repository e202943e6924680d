//go:build amd64 && !noasm

package kernels

// panelDot4 sets acc[PanelRows·q+i] = Σ_k x[k]·P[k][i] over the panels
// P = panels[q] of w (len(x) == w.In), k ascending, each product rounded to
// float32 before it is added: panelDot4Go's bits. With AVX2 (and F16C for
// binary16) the loop runs in assembly, sixteen outputs per panel in two
// vectors, eight independent accumulators in all; where the CPU has
// AVX-512, sixteen outputs per panel in one 512-bit vector.
func panelDot4(acc *[panelGroup * PanelRows]float32, x []float32, w *Mat, panels *[panelGroup]int) {
	*acc = [panelGroup * PanelRows]float32{}
	panelDot4At(acc, x, w, panels, 0)
}

// panelDot4At continues acc[PanelRows·q+i] by Σ_j x[j]·P[k0+j][i] over the
// panels P = panels[q] of w (len(x) ≤ w.In−k0), j ascending, from the
// values acc holds: panelDot4AtGo's bits. The assembly kernels load the
// accumulators from acc and store them back, so runs of k taken one call
// at a time give the bits of one call over their union.
func panelDot4At(acc *[panelGroup * PanelRows]float32, x []float32, w *Mat, panels *[panelGroup]int, k0 int) {
	n := len(x)
	if n == 0 {
		return
	}
	if !gemvAsm(w.DType) {
		panelDot4AtGo(acc, x, w, panels, k0)
		return
	}
	span := w.In * PanelRows
	lo, hi := k0*PanelRows, (k0+n)*PanelRows
	if w.DType == F32 {
		var p [panelGroup]*float32
		for q, pn := range panels {
			p[q] = &w.Panels.F32[pn*span : (pn+1)*span][lo:hi][0]
		}
		if hasAVX512 {
			panelDot4F32AVX512(&p, &x[0], n, acc)
			return
		}
		panelDot4F32AVX2(&p, &x[0], n, acc)
		return
	}
	var p [panelGroup]*uint16
	for q, pn := range panels {
		p[q] = &w.Panels.Half[pn*span : (pn+1)*span][lo:hi][0]
	}
	switch {
	case w.DType == F16 && hasAVX512:
		panelDot4F16AVX512(&p, &x[0], n, acc)
	case w.DType == F16:
		panelDot4F16AVX2(&p, &x[0], n, acc)
	case hasAVX512:
		panelDot4BF16AVX512(&p, &x[0], n, acc)
	default:
		panelDot4BF16AVX2(&p, &x[0], n, acc)
	}
}

// panelDot4Idx continues acc[PanelRows·q+i] by Σ_j x[j]·P[kidx[j]][i] over
// the panels P = panels[q] of w, j ascending (kidx strictly ascending,
// within [0, w.In)), from the values acc holds: the bits of panelDot4At
// called run by run over the same rows. It reports false, doing nothing,
// where no indexed kernel serves w's dtype (the caller then goes run by
// run).
func panelDot4Idx(acc *[panelGroup * PanelRows]float32, x []float32, kidx []int32, w *Mat, panels *[panelGroup]int) bool {
	if !panelIndexed(w.DType) {
		return false
	}
	n := len(x)
	if n == 0 {
		return true
	}
	if len(kidx) != n || int(kidx[n-1]) >= w.In {
		panic(msgScatterIdx)
	}
	span := w.In * PanelRows
	var p [panelGroup]*uint16
	for q, pn := range panels {
		p[q] = &w.Panels.Half[pn*span : (pn+1)*span][0]
	}
	panelDot4F16IdxAVX512(&p, &x[0], n, acc, &kidx[0])
	return true
}

// panelIndexed reports whether panelDot4Idx has a kernel for dt here.
func panelIndexed(dt DType) bool { return dt == F16 && hasAVX512 && gemvAsm(F16) }

// panelDot4F16IdxAVX512 is panelDot4F16AVX512 over listed panel rows
// (panels_amd64.s; kidx last, so the other arguments sit where the panel
// kernels' shared macros read them).
//
//go:noescape
func panelDot4F16IdxAVX512(p *[panelGroup]*uint16, x *float32, n int, acc *[panelGroup * PanelRows]float32, kidx *int32)

// panelKernel names the panel kernel used for w's dtype.
func panelKernel(dt DType) string {
	if gemvAsm(dt) && hasAVX512 {
		return "avx512 4-panel"
	}
	if gemvAsm(dt) {
		return "avx2 4-panel"
	}
	return "go 4-panel"
}

// panelDot4F32AVX2 advances acc[16q+i] by Σ_{k<n} x[k]·p[q][16k+i]
// (VMULPS then VADDPS per lane), n > 0 (panels_amd64.s).
//
//go:noescape
func panelDot4F32AVX2(p *[panelGroup]*float32, x *float32, n int, acc *[panelGroup * PanelRows]float32)

// panelDot4F16AVX2 is panelDot4F32AVX2 over binary16 panels (VCVTPH2PS).
//
//go:noescape
func panelDot4F16AVX2(p *[panelGroup]*uint16, x *float32, n int, acc *[panelGroup * PanelRows]float32)

// panelDot4BF16AVX2 is panelDot4F32AVX2 over bfloat16 panels (widened by a shift).
//
//go:noescape
func panelDot4BF16AVX2(p *[panelGroup]*uint16, x *float32, n int, acc *[panelGroup * PanelRows]float32)

// panelDot4F32AVX512 is panelDot4F32AVX2 with each panel's sixteen outputs
// in one 512-bit accumulator (panels_amd64.s; the same bits).
//
//go:noescape
func panelDot4F32AVX512(p *[panelGroup]*float32, x *float32, n int, acc *[panelGroup * PanelRows]float32)

// panelDot4F16AVX512 is panelDot4F32AVX512 over binary16 panels (VCVTPH2PS).
//
//go:noescape
func panelDot4F16AVX512(p *[panelGroup]*uint16, x *float32, n int, acc *[panelGroup * PanelRows]float32)

// panelDot4BF16AVX512 is panelDot4F32AVX512 over bfloat16 panels.
//
//go:noescape
func panelDot4BF16AVX512(p *[panelGroup]*uint16, x *float32, n int, acc *[panelGroup * PanelRows]float32)
