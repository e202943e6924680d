package engine

import (
	"fmt"
	"slices"

	"sparsegate/harness/kernels"
)

// Hybrid returns a model that runs base's weights except the layer
// components that fromOther selects (mlp true for the MLP block, false for
// attention), which run other's. It is how bisect tries a pruned checkpoint
// one unit at a time. Both models must have the same architecture. The
// hybrid shares their weights: closing it does nothing; close base and other
// when done.
func Hybrid(base, other *Model, fromOther func(layer int, mlp bool) bool) (*Model, error) {
	if *base.Config != *other.Config {
		return nil, fmt.Errorf("%s and %s have different architectures; a hybrid needs two checkpoints of the same shape", base.Dir, other.Dir)
	}
	h := *base
	h.layers = slices.Clone(base.layers)
	h.borrowed = true
	for li := range h.layers {
		b, o := &h.layers[li], &other.layers[li]
		if fromOther(li, false) {
			b.attnNormW, b.attnNormB = o.attnNormW, o.attnNormB
			b.qkv, b.q, b.k, b.v, b.o = o.qkv, o.q, o.k, o.v, o.o
			b.qkvB, b.qB, b.kB, b.vB, b.oB, b.oT = o.qkvB, o.qB, o.kB, o.vB, o.oB, o.oT
		}
		if fromOther(li, true) {
			b.mlpNormW, b.mlpNormB = o.mlpNormW, o.mlpNormB
			b.up, b.gate, b.down, b.neurons = o.up, o.gate, o.down, o.neurons
			b.upB, b.downB = o.upB, o.downB
		}
	}
	return &h, nil
}

// SameUnit reports whether two models of the same architecture hold equal
// weights in one layer component (mlp true for the MLP block, false for
// attention): bisect's search space for a pruned checkpoint is the units
// that differ from the base.
func SameUnit(a, b *Model, layer int, mlp bool) bool {
	la, lb := &a.layers[layer], &b.layers[layer]
	if mlp {
		return sameVec(la.mlpNormW, lb.mlpNormW) && sameVec(la.mlpNormB, lb.mlpNormB) &&
			sameMat(la.up, lb.up) && sameMat(la.gate, lb.gate) && sameMat(la.down, lb.down) &&
			sameVec(la.upB, lb.upB) && sameVec(la.downB, lb.downB)
	}
	return sameVec(la.attnNormW, lb.attnNormW) && sameVec(la.attnNormB, lb.attnNormB) &&
		sameMat(la.qkv, lb.qkv) && sameMat(la.q, lb.q) && sameMat(la.k, lb.k) && sameMat(la.v, lb.v) && sameMat(la.o, lb.o) &&
		sameVec(la.qkvB, lb.qkvB) && sameVec(la.qB, lb.qB) && sameVec(la.kB, lb.kB) && sameVec(la.vB, lb.vB) && sameVec(la.oB, lb.oB)
}

func sameVec(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] && !(a[i] != a[i] && b[i] != b[i]) {
			return false
		}
	}
	return true
}

func sameMat(a, b *kernels.Mat) bool {
	if a == nil || b == nil {
		return a == b
	}
	return a.DType == b.DType && a.Out == b.Out && a.In == b.In && a.Transposed == b.Transposed &&
		sameVec(a.F32, b.F32) && slices.Equal(a.Half, b.Half)
}
