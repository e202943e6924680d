package engine

import (
	"bufio"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/synth"
)

// The engine benchmarks run on an OPT-125M-shaped checkpoint with f16 weights:
// the directory in SPARSEGATE_BENCH_MODEL, or one written once per test binary
// into a temporary directory (about 250 MB). .ci/bench runs them beside the
// PyTorch reference on the same checkpoint.
var benchModel struct {
	once sync.Once
	dir  string
	err  error
}

func benchDir(b *testing.B) string {
	if d := os.Getenv("SPARSEGATE_BENCH_MODEL"); d != "" {
		return d
	}
	benchModel.once.Do(func() {
		dir, err := os.MkdirTemp("", "sparsegate-bench-")
		if err != nil {
			benchModel.err = err
			return
		}
		benchModel.dir = filepath.Join(dir, "opt-125m")
		benchModel.err = synth.Write(benchModel.dir, synth.OPT125M(), synth.Options{Seed: 1, DType: checkpoint.F16})
	})
	if benchModel.err != nil {
		b.Fatal(benchModel.err)
	}
	return benchModel.dir
}

func TestMain(m *testing.M) {
	code := m.Run()
	if benchModel.dir != "" {
		os.RemoveAll(filepath.Dir(benchModel.dir))
	}
	os.Exit(code)
}

func benchTokens(n, vocab int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = (i*7919 + 13) % vocab // the same ids torchbench.py uses
	}
	return s
}

// BenchmarkEnginePrefill512 runs one 512-token sequence through the model,
// logits included, and reports tokens per second. Like the PyTorch
// reference (torchbench.py), it runs one untimed forward first; each timed
// sequence then starts from a Reset session, as the runner scores, so the
// timing holds the forward and not the first touch of a fresh 37 MB cache.
func BenchmarkEnginePrefill512(b *testing.B) {
	m, err := Load(benchDir(b), Options{Threads: 2})
	if err != nil {
		b.Fatal(err)
	}
	defer m.Close()
	toks := benchTokens(512, m.Config.VocabSize)
	logits := make([]float32, len(toks)*m.Config.VocabSize)
	s := m.NewSession()
	if _, err := m.Forward([]*Session{s}, [][]int{toks}, nil); err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for range b.N {
		s.Reset()
		h, err := m.Forward([]*Session{s}, [][]int{toks}, nil)
		if err != nil {
			b.Fatal(err)
		}
		m.Logits(logits, h, len(toks))
	}
	b.ReportMetric(float64(len(toks)*b.N)/b.Elapsed().Seconds(), "tok/s")
}

// BenchmarkEngineDecode decodes 64 tokens one at a time after a 16-token
// prompt (not timed), with the key/value cache, and reports tokens per second.
func BenchmarkEngineDecode(b *testing.B) {
	m, err := Load(benchDir(b), Options{Threads: 2})
	if err != nil {
		b.Fatal(err)
	}
	defer m.Close()
	var took time.Duration
	b.ResetTimer()
	for range b.N {
		took += decodeOnce(b, m)
	}
	b.ReportMetric(float64(decodeSteps*b.N)/took.Seconds(), "tok/s")
}

// decodeSteps is the number of greedy steps decodeOnce times.
const decodeSteps = 64

// decodeOnce runs a 16-token prompt (not timed), then decodeSteps greedy
// single-token steps with the key/value cache, and returns the time the steps
// took, logits included.
func decodeOnce(b *testing.B, m *Model) time.Duration {
	V := m.Config.VocabSize
	logits := make([]float32, V)
	s := m.NewSession()
	defer s.Close() // as Generate does: the next call starts in this cache's memory
	h, err := m.Forward([]*Session{s}, [][]int{benchTokens(16, V)}, nil)
	if err != nil {
		b.Fatal(err)
	}
	t0 := time.Now()
	next := 0
	for range decodeSteps {
		if next > 0 {
			h, err = m.Forward([]*Session{s}, [][]int{{next}}, nil)
			if err != nil {
				b.Fatal(err)
			}
		}
		m.Logits(logits, h[len(h)-m.Config.Hidden:], 1)
		next = 1 + argmax(logits)%(V-1)
	}
	return time.Since(t0)
}

func argmax(x []float32) int {
	best := 0
	for i, v := range x {
		if v > x[best] {
			best = i
		}
	}
	return best
}

// BenchmarkEngineLoadRSS loads the model, runs one short sequence, and
// reports the process's resident memory (VmRSS) beside the weights' size on
// disk: f16 weights stay f16, and Load releases each matrix's mapped pages
// once its panel copy is made, so it should stay near the file size, not
// twice it.
func BenchmarkEngineLoadRSS(b *testing.B) {
	for range b.N {
		m, err := Load(benchDir(b), Options{Threads: 2})
		if err != nil {
			b.Fatal(err)
		}
		if _, err := m.LogProbs(benchTokens(8, m.Config.VocabSize), nil); err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(vmRSS(b))/(1<<20), "rss-MiB")
		b.ReportMetric(float64(m.Weights().TotalBytes())/(1<<20), "weights-MiB")
		m.Close()
	}
}

// vmRSS reads the resident set size from /proc/self/status, in bytes.
func vmRSS(b *testing.B) int64 { return procStatusBytes(b, "VmRSS") }

// procStatusBytes reads a "kB" field of /proc/self/status (VmRSS, VmHWM), in
// bytes; it skips the benchmark where the file or the field is missing.
func procStatusBytes(b *testing.B, field string) int64 {
	f, err := os.Open("/proc/self/status")
	if err != nil {
		b.Skip("no /proc/self/status: ", err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if rest, ok := strings.CutPrefix(sc.Text(), field+":"); ok {
			kb, err := strconv.ParseInt(strings.TrimSuffix(strings.TrimSpace(rest), " kB"), 10, 64)
			if err != nil {
				b.Fatalf("/proc/self/status: %s: %v", field, err)
			}
			return kb << 10
		}
	}
	b.Skip(field + " not found in /proc/self/status")
	return 0
}
