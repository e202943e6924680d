package sparsity

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// A Component is the part of a decoder layer that a rule restricts.
type Component string

// The two components a build restricts, in their fixed order.
const (
	// MLP is the feed-forward block; its units are the hidden neurons (FFN wide).
	MLP Component = "mlp"
	// Attention is the self-attention block; its units are the query heads.
	Attention Component = "attention"
)

// Components lists the components in their fixed order (mlp before attention).
func Components() []Component { return []Component{MLP, Attention} }

// index gives the component's position in the fixed order.
func (c Component) index() int {
	if c == MLP {
		return 0
	}
	return 1
}

// A Unit is one (layer, component) pair: the granularity at which rules are
// set, statistics kept and bisect toggles dense.
type Unit struct {
	Layer     int
	Component Component
}

// String returns e.g. "layer 3 mlp".
func (u Unit) String() string { return fmt.Sprintf("layer %d %s", u.Layer, u.Component) }

// less orders units by layer, then mlp before attention.
func (u Unit) less(v Unit) bool {
	if u.Layer != v.Layer {
		return u.Layer < v.Layer
	}
	return u.Component.index() < v.Component.index()
}

// A Mode is how a rule chooses the units that run.
type Mode string

// The rule modes.
const (
	// Dense runs every unit.
	Dense Mode = "dense"
	// Oracle runs the K units of largest actual magnitude (Token.Dense).
	Oracle Mode = "oracle"
	// Threshold runs the MLP neurons whose |post-activation| exceeds a threshold.
	Threshold Mode = "threshold"
	// PredictorMode runs the K units a trained low-rank predictor scores highest.
	PredictorMode Mode = "predictor"
	// Static runs a fixed list of units for every token.
	Static Mode = "static"
)

// modeNames lists every mode, for messages.
const modeNames = "dense, oracle, threshold, predictor, static"

// What a threshold is measured against.
const (
	// OnActivation compares |post-activation| with the threshold itself.
	OnActivation = "activation"
	// OnInput compares |post-activation| with threshold · rms(MLP input).
	OnInput = "input"
)

// Which vector a predictor reads.
const (
	// InputSelf reads the component's own normed input (Token.Input).
	InputSelf = "self"
	// InputPrevious reads the residual entering the previous layer
	// (Token.PrevLayerInput), so the prediction can run one layer ahead.
	InputPrevious = "previous"
)

// A Rule says how one unit's kept set is chosen. Only the fields of its Mode
// are meaningful; the others must be zero.
type Rule struct {
	// Mode selects the rule.
	Mode Mode
	// K is the number of units kept (oracle, predictor).
	K int
	// Threshold is the threshold value t (threshold).
	Threshold float64
	// On says what the threshold is measured against: OnActivation or OnInput
	// (threshold).
	On string
	// Rank is the predictor's hidden width (predictor).
	Rank int
	// Input is the vector the predictor reads: InputSelf or InputPrevious
	// (predictor).
	Input string
	// Keep lists the units run for every token, ascending (static). An empty,
	// non-nil list skips the whole component.
	Keep []int
	// Calibration, when set, records how the rule did when it was fitted.
	Calibration *Calibration
}

// A Calibration records how a rule did on calibration data, for inspection.
type Calibration struct {
	// Recall is the mean fraction of the oracle set (same size) the rule kept.
	Recall float64
	// KeptFraction is the mean fraction of the component's units kept.
	KeptFraction float64
	// Tokens is how many tokens the figures were measured on (0: not recorded).
	Tokens int
}

// String describes the rule in one line, e.g. "predictor k=512 rank=64 input=self".
func (r Rule) String() string {
	switch r.Mode {
	case Oracle:
		return fmt.Sprintf("oracle k=%d", r.K)
	case Threshold:
		return fmt.Sprintf("threshold t=%s on=%s", strconv.FormatFloat(r.Threshold, 'g', -1, 64), r.On)
	case PredictorMode:
		return fmt.Sprintf("predictor k=%d rank=%d input=%s", r.K, r.Rank, r.Input)
	case Static:
		return fmt.Sprintf("static keep=%d", len(r.Keep))
	}
	return string(r.Mode)
}

// check validates the rule for a unit of the given width (0: width unknown,
// skip the range checks). It returns every problem found, each with its fix.
func (r Rule) check(u Unit, width int) []string {
	var errs []string
	bad := func(format string, args ...any) { errs = append(errs, fmt.Sprintf(format, args...)) }
	what := "neurons (the MLP width)"
	if u.Component == Attention {
		what = "heads"
	}
	checkK := func() {
		if r.K < 1 || (width > 0 && r.K > width) {
			if width > 0 {
				bad("k %d is out of range; set k between 1 and %d, the number of %s", r.K, width, what)
			} else {
				bad("k %d is out of range; set k to at least 1", r.K)
			}
		}
	}
	var extra []string // fields set that the mode does not use
	if r.Mode != Oracle && r.Mode != PredictorMode && r.K != 0 {
		extra = append(extra, "k")
	}
	if r.Mode != Threshold && (r.Threshold != 0 || r.On != "") {
		extra = append(extra, "threshold/on")
	}
	if r.Mode != PredictorMode && (r.Rank != 0 || r.Input != "") {
		extra = append(extra, "rank/input")
	}
	if r.Mode != Static && r.Keep != nil {
		extra = append(extra, "keep")
	}
	if len(extra) > 0 {
		bad("mode %s does not use %s; remove them or change the mode", r.Mode, strings.Join(extra, ", "))
	}
	switch r.Mode {
	case Dense:
	case Oracle:
		checkK()
	case Threshold:
		if u.Component != MLP {
			bad("mode threshold applies to the mlp only; use oracle, predictor or static for attention")
		}
		if math.IsNaN(r.Threshold) || math.IsInf(r.Threshold, 0) || r.Threshold < 0 {
			bad("threshold %v must be a finite number ≥ 0", r.Threshold)
		}
		if r.On != OnActivation && r.On != OnInput {
			bad("on %q is unknown; set on to %q or %q", r.On, OnActivation, OnInput)
		}
	case PredictorMode:
		checkK()
		if r.Rank < 1 {
			bad("rank %d must be at least 1; set it to the predictor's hidden width", r.Rank)
		}
		switch r.Input {
		case InputSelf:
		case InputPrevious:
			if u.Layer == 0 {
				bad("input %q is impossible at layer 0 (there is no previous layer); use %q", InputPrevious, InputSelf)
			}
		default:
			bad("input %q is unknown; set input to %q or %q", r.Input, InputSelf, InputPrevious)
		}
	case Static:
		if r.Keep == nil {
			bad("mode static needs keep, the ascending list of unit indices to run")
			break
		}
		for i, v := range r.Keep {
			switch {
			case v < 0 && width == 0:
				bad("keep[%d] = %d is negative; unit indices start at 0", i, v)
			case v < 0 || (width > 0 && v >= width):
				bad("keep[%d] = %d is out of range; indices run from 0 to %d, the number of %s minus one", i, v, width-1, what)
			case i > 0 && v == r.Keep[i-1]:
				bad("keep[%d] = %d appears twice; list each index once", i, v)
			case i > 0 && v < r.Keep[i-1]:
				bad("keep[%d] = %d follows %d; list the indices in ascending order", i, v, r.Keep[i-1])
			}
			if len(errs) >= 4 {
				break
			}
		}
	case "":
		bad("mode is missing; set mode to one of %s", modeNames)
	default:
		bad("mode %q is unknown; set mode to one of %s", r.Mode, modeNames)
	}
	if c := r.Calibration; c != nil {
		for _, f := range []struct {
			name string
			v    float64
		}{{"recall", c.Recall}, {"kept_fraction", c.KeptFraction}} {
			if !(f.v >= 0 && f.v <= 1) {
				bad("calibration %s %v must lie in [0, 1]", f.name, f.v)
			}
		}
		if c.Tokens < 0 {
			bad("calibration tokens %d must not be negative", c.Tokens)
		}
	}
	return errs
}
