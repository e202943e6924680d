package sparsity

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"

	"sparsegate/harness/engine"
)

// CalibrateOptions configure Calibrate; zero values take the defaults named.
type CalibrateOptions struct {
	// KeepMLP is the fraction of MLP neurons each token keeps (default 0.1).
	KeepMLP float64
	// KeepHeads is the fraction of attention heads each token keeps; 0 leaves
	// attention dense.
	KeepHeads float64
	// Recall, when positive, picks each layer's MLP budget instead of KeepMLP:
	// the smallest k whose held-out recall reaches it (never above 0.5 of the
	// width; KeepMLP is then the starting budget the predictor trains for).
	Recall float64
	// Rank and HeadRank are the predictors' hidden widths (defaults 64 and 16).
	Rank, HeadRank int
	// Input is what the predictors read: InputSelf (default) or InputPrevious
	// (lookahead; layer 0 always reads its own input).
	Input string
	// Window is the calibration window length in tokens (default 256, capped
	// at the model's positions); MaxTokens caps the tokens used (default 20000).
	Window, MaxTokens int
	// Train configures predictor training (K, Rank and Seed are set per layer).
	Train TrainOptions
	// Seed fixes predictor training.
	Seed uint64
	// Progress, when set, receives a line per step of the work.
	Progress func(line string)
}

// A UnitReport is what calibration measured for one unit.
type UnitReport struct {
	Unit Unit
	// K and Width are the kept and total units per token.
	K, Width int
	// Recall is the held-out recall of the truly active units by the predicted set.
	Recall float64
	// ActiveFraction is the mean fraction of units truly active per token.
	ActiveFraction float64
	// FLOPsSaved is the fraction of the component's dense multiply-adds a token
	// no longer does, predictor cost included.
	FLOPsSaved float64
}

// A CalibrationReport summarises a calibration run.
type CalibrationReport struct {
	// Tokens is the number of calibration tokens (rows) recorded.
	Tokens int
	// Units holds one report per calibrated unit, in unit order.
	Units []UnitReport
}

// WriteTable prints the report as a fixed-width table.
func (r *CalibrationReport) WriteTable(w io.Writer) error {
	if _, err := fmt.Fprintf(w, "%-22s %6s %6s %8s %8s %8s\n", "unit", "k", "width", "active", "recall", "saved"); err != nil {
		return err
	}
	for _, u := range r.Units {
		if _, err := fmt.Fprintf(w, "%-22s %6d %6d %8.3f %8.3f %7.1f%%\n", u.Unit, u.K, u.Width, u.ActiveFraction, u.Recall, 100*u.FLOPsSaved); err != nil {
			return err
		}
	}
	_, err := fmt.Fprintf(w, "calibrated on %d tokens\n", r.Tokens)
	return err
}

// recorder is a hook that runs the base densely and keeps, per layer, the
// predictor inputs and the truly active units of every token.
type recorder struct {
	cfgFFN, heads, layers int
	input                 string
	relu                  bool
	keepHeads             int
	mlpX, attnX           [][]float32 // per layer, rows × d
	mlpY, attnY           [][]uint8   // per layer, rows × width
	scratch               []uint64
	sel                   []int32
}

func (r *recorder) pick(t *engine.Token) []float32 {
	if r.input == InputPrevious && t.PrevLayerInput != nil {
		return t.PrevLayerInput
	}
	return t.Input
}

func (r *recorder) Heads(t *engine.Token) []int32 {
	if r.keepHeads > 0 {
		r.attnX[t.Layer] = append(r.attnX[t.Layer], r.pick(t)...)
		r.sel = topKInto(r.sel, r.scratch, t.Dense(), r.keepHeads)
		row := make([]uint8, r.heads)
		for _, h := range r.sel {
			row[h] = 1
		}
		r.attnY[t.Layer] = append(r.attnY[t.Layer], row...)
	}
	return nil
}

func (r *recorder) Neurons(t *engine.Token) []int32 {
	r.mlpX[t.Layer] = append(r.mlpX[t.Layer], r.pick(t)...)
	act := t.Dense()
	row := make([]uint8, len(act))
	for i, v := range act {
		if v > 0 {
			row[i] = 1
		}
	}
	if !r.relu { // no exact zeros: the active set is the top 10% by magnitude
		r.sel = topKInto(r.sel, r.scratch, absInto(nil, act), max(1, len(act)/10))
		clear(row)
		for _, i := range r.sel {
			row[i] = 1
		}
	}
	r.mlpY[t.Layer] = append(r.mlpY[t.Layer], row...)
	return nil
}

// Calibrate makes a sparse build from a dense base: it runs the base densely
// over the calibration text, records every layer's predictor inputs and truly
// active units (post-ReLU > 0 for ReLU models, the top 10% by magnitude
// otherwise; for heads, the top KeepHeads by output norm), trains one
// predictor per layer and component, picks each layer's budget, and writes
// manifest.json and predictors.safetensors into outDir. baseDir is where the
// base lives; the manifest records it relative to outDir.
func Calibrate(base *engine.Model, baseDir string, text []byte, outDir string, opts CalibrateOptions) (*CalibrationReport, error) {
	cfg := base.Config
	if base.Tokenizer == nil {
		return nil, fmt.Errorf("%s: the base has no tokenizer; calibration needs text it can encode", baseDir)
	}
	if opts.KeepMLP == 0 {
		opts.KeepMLP = 0.1
	}
	if opts.Rank == 0 {
		opts.Rank = 64
	}
	if opts.HeadRank == 0 {
		opts.HeadRank = 16
	}
	if opts.Input == "" {
		opts.Input = InputSelf
	}
	if opts.Window == 0 {
		opts.Window = 256
	}
	opts.Window = min(opts.Window, cfg.MaxPositions)
	if opts.MaxTokens == 0 {
		opts.MaxTokens = 20000
	}
	switch {
	case !(opts.KeepMLP > 0 && opts.KeepMLP <= 1):
		return nil, fmt.Errorf("the MLP keep fraction %g must be in (0, 1]", opts.KeepMLP)
	case opts.KeepHeads < 0 || opts.KeepHeads > 1:
		return nil, fmt.Errorf("the head keep fraction %g must be in [0, 1]", opts.KeepHeads)
	case opts.Recall < 0 || opts.Recall > 1:
		return nil, fmt.Errorf("the recall target %g must be in [0, 1]", opts.Recall)
	case opts.Input != InputSelf && opts.Input != InputPrevious:
		return nil, fmt.Errorf("predictor input %q: use %q or %q", opts.Input, InputSelf, InputPrevious)
	}
	say := func(format string, args ...any) {
		if opts.Progress != nil {
			opts.Progress(fmt.Sprintf(format, args...))
		}
	}
	ids := base.Tokenizer.EncodeForModel(string(text))
	if len(ids) > opts.MaxTokens {
		ids = ids[:opts.MaxTokens]
	}
	if len(ids) < 200 {
		return nil, fmt.Errorf("the calibration text encodes to %d tokens; give at least 200 (more is better)", len(ids))
	}
	rec := &recorder{cfgFFN: cfg.FFN, heads: cfg.Heads, layers: cfg.Layers, input: opts.Input,
		relu: cfg.Activation == "relu", mlpX: make([][]float32, cfg.Layers), attnX: make([][]float32, cfg.Layers),
		mlpY: make([][]uint8, cfg.Layers), attnY: make([][]uint8, cfg.Layers),
		scratch: make([]uint64, 2*max(cfg.FFN, cfg.Heads))}
	if opts.KeepHeads > 0 {
		rec.keepHeads = max(1, int(math.Round(opts.KeepHeads*float64(cfg.Heads))))
	}
	for start := 0; start < len(ids); start += opts.Window {
		end := min(start+opts.Window, len(ids))
		s := base.NewSession()
		if _, err := base.Forward([]*engine.Session{s}, [][]int{ids[start:end]}, rec); err != nil {
			return nil, fmt.Errorf("recording calibration activations: %w", err)
		}
		say("recorded %d/%d tokens", end, len(ids))
	}
	n := len(ids)
	m := &Manifest{Base: Base{}, Layers: make([]LayerRules, cfg.Layers)}
	preds := map[Unit]*Predictor{}
	report := &CalibrationReport{Tokens: n}
	for l := 0; l < cfg.Layers; l++ {
		m.Layers[l] = LayerRules{Layer: l, MLP: Rule{Mode: Dense}, Attention: Rule{Mode: Dense}}
		input := opts.Input
		if l == 0 {
			input = InputSelf
		}
		comps := []struct {
			c     Component
			x     []float32
			y     []uint8
			width int
			k     int
			rank  int
		}{{MLP, rec.mlpX[l], rec.mlpY[l], cfg.FFN, max(1, int(math.Round(opts.KeepMLP*float64(cfg.FFN)))), opts.Rank}}
		if rec.keepHeads > 0 {
			comps = append(comps, struct {
				c     Component
				x     []float32
				y     []uint8
				width int
				k     int
				rank  int
			}{Attention, rec.attnX[l], rec.attnY[l], cfg.Heads, rec.keepHeads, opts.HeadRank})
		}
		for _, c := range comps {
			u := Unit{Layer: l, Component: c.c}
			x, y := c.x, c.y
			if input == InputPrevious && l > 0 && len(x) != n*cfg.Hidden {
				return nil, errors.New("internal: lookahead inputs missing")
			}
			// Hold out the last tenth of the tokens for choosing k and reporting recall.
			nt := n - n/10
			tOpts := opts.Train
			tOpts.K, tOpts.Rank, tOpts.Seed = c.k, c.rank, opts.Seed+uint64(l)*2+uint64(c.c.index())
			p, _, err := TrainPredictor(x[:nt*cfg.Hidden], y[:nt*c.width], nt, cfg.Hidden, c.width, tOpts)
			if err != nil {
				return nil, fmt.Errorf("%s: training the predictor: %w", u, err)
			}
			// The build stores the matrices in binary16 (half the bytes a
			// decode step streams); k and the recall are measured on the
			// rounded weights the build will run.
			p.RoundToHalf()
			hx, hy, hn := x[nt*cfg.Hidden:], y[nt*c.width:], n-nt
			k := c.k
			if c.c == MLP && opts.Recall > 0 {
				k = budgetForRecall(p, hx, hy, hn, c.width, opts.Recall)
			}
			recall := RecallAtK(p, hx, hy, hn, k)
			active := 0.0
			for _, v := range hy {
				active += float64(v)
			}
			ur := UnitReport{Unit: u, K: k, Width: c.width, Recall: recall,
				ActiveFraction: active / float64(hn*c.width), FLOPsSaved: flopsSaved(cfg.Hidden, c.width, k, c.rank, c.c, cfg.Activation == "silu")}
			report.Units = append(report.Units, ur)
			*m.Layers[l].Rule(c.c) = Rule{Mode: PredictorMode, K: k, Rank: c.rank, Input: input,
				Calibration: &Calibration{Recall: recall, KeptFraction: float64(k) / float64(c.width), Tokens: n}}
			preds[u] = p
			say("%s: k %d of %d, held-out recall %.3f", u, k, c.width, recall)
		}
	}
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		return nil, err
	}
	rel, err := relativeBase(outDir, baseDir)
	if err != nil {
		return nil, err
	}
	sha, err := base.Weights().SHA256()
	if err != nil {
		return nil, err
	}
	m.Base = Base{Path: rel, SHA256: sha}
	m.Predictors = "predictors.safetensors"
	if _, err := New(base, m, preds); err != nil {
		return nil, fmt.Errorf("internal: the calibrated build does not check: %w", err)
	}
	if err := WritePredictors(filepath.Join(outDir, m.Predictors), preds); err != nil {
		return nil, err
	}
	if err := m.Save(outDir); err != nil {
		return nil, err
	}
	return report, nil
}

// budgetForRecall returns the smallest k (at most half the width) whose recall
// on the held-out rows reaches target, by bisection (recall grows with k).
func budgetForRecall(p *Predictor, x []float32, y []uint8, n, width int, target float64) int {
	lo, hi := 1, max(1, width/2)
	if RecallAtK(p, x, y, n, hi) < target {
		return hi
	}
	for lo < hi {
		mid := (lo + hi) / 2
		if RecallAtK(p, x, y, n, mid) >= target {
			hi = mid
		} else {
			lo = mid + 1
		}
	}
	return lo
}

// flopsSaved is the fraction of a component's dense multiply-adds per token
// that a budget of k units (plus the predictor) avoids. MLP: up (and gate)
// and down projections, d·width each; attention: Q, K, V and O, d·d each,
// shared evenly by the heads.
func flopsSaved(d, width, k, rank int, c Component, gated bool) float64 {
	pred := float64(rank * (d + width))
	var dense, sparse float64
	if c == MLP {
		per := 2.0
		if gated {
			per = 3
		}
		dense = per * float64(d*width)
		sparse = per*float64(d*k) + pred
	} else {
		dense = 4 * float64(d*d)
		sparse = dense*float64(k)/float64(width) + pred
	}
	return 1 - sparse/dense
}

// relativeBase expresses baseDir relative to the build directory.
func relativeBase(outDir, baseDir string) (string, error) {
	ao, err := filepath.Abs(outDir)
	if err != nil {
		return "", err
	}
	ab, err := filepath.Abs(baseDir)
	if err != nil {
		return "", err
	}
	rel, err := filepath.Rel(ao, ab)
	if err != nil {
		return "", fmt.Errorf("cannot express the base %s relative to the build %s: %w", baseDir, outDir, err)
	}
	return filepath.ToSlash(rel), nil
}
