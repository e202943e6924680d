package kernels

import (
	"fmt"
	"testing"
	"time"
)

func TestZZStream(t *testing.T) {
	const L = 12
	var mats []*Mat
	for l := 0; l < 2*L; l++ {
		out, in := 3072, 768
		if l%2 == 1 {
			out, in = 768, 3072
		}
		w := &Mat{DType: F16, Out: out, In: in, Half: make([]uint16, out*in)}
		for i := range w.Half {
			w.Half[i] = uint16(0x3c00 + i%7)
		}
		w.Panels = PackPanels(w)
		mats = append(mats, w)
	}
	x := make([]float32, 3072)
	y := make([]float32, 3072)
	for _, th := range []int{1, 2} {
		var sc Scratch
		if th > 1 {
			sc.Team = NewTeam(th - 1)
		}
		best := 0.0
		for rep := 0; rep < 8; rep++ {
			t0 := time.Now()
			bytes := 0
			for _, w := range mats {
				sc.Linear(y[:w.Out], x[:w.In], 1, w, nil, th)
				bytes += 2 * w.Out * w.In
			}
			gb := float64(bytes) / time.Since(t0).Seconds() / 1e9
			if gb > best {
				best = gb
			}
		}
		fmt.Printf("threads %d: best %.1f GB/s\n", th, best)
	}
}
