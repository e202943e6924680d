package engine

import (
	"os"
	"path/filepath"
	"slices"
	"sync"
	"testing"
	"time"
	"unsafe"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/kernels"
	"sparsegate/harness/synth"
)

// decodeBytesPerToken counts the weight bytes one batch-1 decode step reads:
// every weight matrix once (q, k, v and out projections, the two MLP
// matrices, and the output head, which is the embedding when tied) at the
// dtype the engine keeps it in, which is the stored dtype for a model of
// this size: the engine maps f16 weights and converts them a few values at
// a time inside the kernels (only models under widenMaxWeights are widened
// at load, see Options.NoWiden). Add one row each of the token and position
// embeddings and every norm weight and bias (float32). The key/value cache
// is left out (under 2% here), so the bound is a little generous to the
// bandwidth side.
func decodeBytesPerToken(m *Model) int64 {
	elem := func(w *kernels.Mat) int64 {
		if w.DType == kernels.F32 {
			return 4
		}
		return 2
	}
	mat := func(w *kernels.Mat) int64 {
		if w == nil {
			return 0
		}
		return int64(w.Out) * int64(w.In) * elem(w)
	}
	vec := func(vs ...[]float32) int64 {
		var n int64
		for _, v := range vs {
			n += 4 * int64(len(v))
		}
		return n
	}
	var n int64
	for i := range m.layers {
		l := &m.layers[i]
		for _, w := range []*kernels.Mat{l.qkv, l.q, l.k, l.v, l.o, l.up, l.gate, l.down} {
			n += mat(w)
		}
		n += vec(l.attnNormW, l.attnNormB, l.qkvB, l.qB, l.kB, l.vB, l.oB, l.mlpNormW, l.mlpNormB, l.upB, l.downB)
	}
	n += mat(m.head) + vec(m.normW, m.normB)
	n += int64(m.embed.In) * elem(m.embed)
	if m.pos != nil {
		n += int64(m.pos.In) * elem(m.pos)
	}
	return n
}

// copyBandwidth copies src into dst on two goroutines, one half each, and
// returns the bytes moved per second counting the read and the write
// (2·len(src)·4 bytes). For copies of 1 MiB and more Go's runtime memmove
// on amd64 with AVX uses non-temporal stores (runtime/memmove_amd64.s, Go
// 1.26; Intel CPUs with FSRM take REP MOVS instead, which also skips the
// read-for-ownership of large copies, from memory), so no write-allocate
// traffic goes uncounted: read + write is all of it.
func copyBandwidth(dst, src []float32) float64 {
	half := len(src) / 2
	var wg sync.WaitGroup
	t0 := time.Now()
	for _, r := range [][2]int{{0, half}, {half, len(src)}} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			copy(dst[r[0]:r[1]], src[r[0]:r[1]])
		}()
	}
	wg.Wait()
	return 2 * 4 * float64(len(src)) / time.Since(t0).Seconds()
}

// readBandwidth returns the bytes per second of a 2-goroutine read-only
// pass over src (64-bit words summed into eight independent accumulators,
// so the adds never hold the loads back): the access pattern of a decode
// step, which only reads its weights. It is a diagnostic printed beside the
// copy bandwidth, which stays the bound's reference.
func readBandwidth(src []float32) float64 {
	words := unsafe.Slice((*uint64)(unsafe.Pointer(&src[0])), len(src)/2)
	half := len(words) / 2
	var wg sync.WaitGroup
	var sums [2]uint64 // written once per goroutine, after its pass
	t0 := time.Now()
	for g, r := range [][2]int{{0, half}, {half, len(words)}} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := words[r[0]:r[1]]
			var a [8]uint64
			for i := 0; i+8 <= len(w); i += 8 {
				c := w[i : i+8 : i+8]
				a[0] += c[0]
				a[1] += c[1]
				a[2] += c[2]
				a[3] += c[3]
				a[4] += c[4]
				a[5] += c[5]
				a[6] += c[6]
				a[7] += c[7]
			}
			sums[g] = a[0] + a[1] + a[2] + a[3] + a[4] + a[5] + a[6] + a[7]
		}()
	}
	wg.Wait()
	return 8 * float64(len(words)) / time.Since(t0).Seconds()
}

// copyBufferBytes is the copy loop's buffer size: 256 MiB, eight times the
// 32 MiB last-level cache of the machines this project benchmarks on, so the
// copy runs from memory.
const copyBufferBytes = 256 << 20

// BenchmarkEngineDecodeBound measures batch-1 decode against the memory
// bandwidth bound in one run: each iteration times one decode (64 greedy
// steps after a 16-token prompt, 2 threads) and then two passes of a 2-thread
// copy of a 256 MiB buffer, alternately, so both see the same machine. It
// reports the median decode speed (tok/s), the median copy bandwidth
// (copy-GB/s, read+write, 10⁹ bytes), the weight bytes a decode step reads
// (MB/token, counted by decodeBytesPerToken), the bound they give
// (bound-tok/s = bandwidth ÷ bytes per token) and ratio = tok/s ÷ bound-tok/s.
// As a diagnostic it also times a read-only pass over the same buffer after
// each copy pair (read-GB/s, and read-ratio: tok/s over the bound that read
// bandwidth would give), since a decode step only reads: on some machines
// a copy moves more bytes a second than a read-only stream of two threads
// can. Run it with -benchtime Nx.
func BenchmarkEngineDecodeBound(b *testing.B) {
	m, err := Load(benchDir(b), Options{Threads: 2})
	if err != nil {
		b.Fatal(err)
	}
	defer m.Close()
	src, dst := make([]float32, copyBufferBytes/4), make([]float32, copyBufferBytes/4)
	for i := range src {
		src[i] = float32(i)
	}
	copyBandwidth(dst, src) // fault the pages in
	decodeOnce(b, m)        // and the weights
	var toks, bws, rds []float64
	b.ResetTimer()
	for range b.N {
		toks = append(toks, decodeSteps/decodeOnce(b, m).Seconds())
		bws = append(bws, copyBandwidth(dst, src), copyBandwidth(dst, src))
		rds = append(rds, readBandwidth(src))
	}
	b.StopTimer()
	perToken := float64(decodeBytesPerToken(m))
	tok, bw := medianOf(toks), medianOf(bws)
	bound := bw / perToken
	b.ReportMetric(tok, "tok/s")
	b.ReportMetric(bw/1e9, "copy-GB/s")
	b.ReportMetric(perToken/1e6, "MB/token")
	b.ReportMetric(bound, "bound-tok/s")
	b.ReportMetric(tok/bound, "ratio")
	rd := medianOf(rds)
	b.ReportMetric(rd/1e9, "read-GB/s")
	b.ReportMetric(tok/(rd/perToken), "read-ratio")
}

func medianOf(v []float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}

// The byte count of a decode step covers the weights the OPT layout binds at
// the width the engine reads them: on an f16 checkpoint the matrices at 2
// bytes and the norms and biases at 4 (they are converted at load); on an f32
// checkpoint every parameter at 4 bytes except the position rows a step does
// not read (the token table is the tied head, read whole, and its one row
// again for the embedding).
func TestDecodeBytesPerToken(t *testing.T) {
	for _, dt := range []checkpoint.DType{checkpoint.F16, checkpoint.F32} {
		t.Run(string(dt), func(t *testing.T) {
			cfg := synth.Tiny(checkpoint.OPT)
			dir := filepath.Join(t.TempDir(), "opt")
			require.NoError(t, synth.Write(dir, cfg, synth.Options{Seed: 7, DType: dt}))
			// NoWiden: a model this small would otherwise be widened to f32
			// at load (the OPT-125M shape the benchmark runs is not).
			m, err := Load(dir, Options{Threads: 2, NoWiden: true})
			require.NoError(t, err)
			defer m.Close()
			d, f, v := int64(cfg.Hidden), int64(cfg.FFN), int64(cfg.VocabSize)
			got := decodeBytesPerToken(m)
			if dt == checkpoint.F16 {
				layer := 2*(4*d*d+2*d*f) + 4*(9*d+f) // f16 q, k, v, out, fc1, fc2; f32 norms and biases
				require.Equal(t, int64(cfg.Layers)*layer+2*v*d+4*2*d+2*d+2*d, got)
				return
			}
			unread := int64(cfg.MaxPositions+cfg.PositionOffset-1) * d
			// The token's embedding row is read apart from the tied head.
			require.Equal(t, 4*(cfg.Params()-unread+d), got)
		})
	}
}

// BenchmarkEngineScorePeakRSS reports the process's peak resident memory
// (VmHWM) after scoring 768 tokens with 512-token windows (stride 256, so
// two windows) on 2 threads, beside the model's parameters at float32 (parameter count × 4
// bytes) and their ratio. Run it alone in a fresh process (-run '^$' -bench
// '^BenchmarkEngineScorePeakRSS$'): other benchmarks in the same process
// would raise the peak. It needs SPARSEGATE_BENCH_MODEL, since writing the
// checkpoint in this process would raise the peak too.
func BenchmarkEngineScorePeakRSS(b *testing.B) {
	dir := os.Getenv("SPARSEGATE_BENCH_MODEL")
	if dir == "" {
		b.Skip("set SPARSEGATE_BENCH_MODEL to a checkpoint (sparsegate synth --size 125m --dtype f16): writing one here would count in the peak")
	}
	for range b.N {
		m, err := Load(dir, Options{Threads: 2})
		if err != nil {
			b.Fatal(err)
		}
		lp, _, err := m.SlidingLogProbs(benchTokens(768, m.Config.VocabSize), SlidingOptions{Window: 512, Stride: 256})
		if err != nil {
			b.Fatal(err)
		}
		if len(lp) != 767 {
			b.Fatalf("scored %d targets, want 767", len(lp))
		}
		peak := float64(procStatusBytes(b, "VmHWM"))
		f32 := 4 * float64(m.Config.Params())
		b.ReportMetric(peak/(1<<20), "peak-MiB")
		b.ReportMetric(f32/(1<<20), "f32-weights-MiB")
		b.ReportMetric(peak/f32, "ratio")
		m.Close()
	}
}
