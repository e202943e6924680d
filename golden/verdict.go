package golden

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"

	"sparsegate/harness/results"
)

// VerdictSchema is the verdict JSON schema version.
const VerdictSchema = 1

// An Outcome is the result of comparing one metric, probe or suite.
type Outcome string

// Outcomes, from best to worst (see Worse).
const (
	Pass     Outcome = "pass"     // within tolerance
	Improved Outcome = "improved" // better than golden beyond tolerance: reported, not failed
	Skipped  Outcome = "skipped"  // not run in this shard or not applicable
	New      Outcome = "new"      // no golden value yet
	Missing  Outcome = "missing"  // golden value without a result
	Fail     Outcome = "fail"     // worse than golden beyond tolerance
	Error    Outcome = "error"    // the probe could not run, or a value is NaN
)

var rank = map[Outcome]int{Pass: 0, Improved: 1, Skipped: 2, New: 3, Missing: 4, Fail: 5, Error: 6}

// Worse returns the worse of two outcomes.
func Worse(a, b Outcome) Outcome {
	if rank[b] > rank[a] {
		return b
	}
	return a
}

// Failing reports whether an outcome fails the gate; New and Missing fail
// unless allowNew is set.
func (o Outcome) Failing(allowNew bool) bool {
	switch o {
	case Fail, Error:
		return true
	case New, Missing:
		return !allowNew
	}
	return false
}

// A Verdict is the comparison of one run's Results with a golden directory.
type Verdict struct {
	// Schema is VerdictSchema.
	Schema int `json:"schema"`
	// Harness is the sparsegate version that compared.
	Harness string `json:"harness"`
	// Suite identifies the suite.
	Suite results.SuiteRef `json:"suite"`
	// GoldenDir is the golden directory compared against.
	GoldenDir string `json:"golden_dir"`
	// Outcome is the worst probe outcome.
	Outcome Outcome `json:"outcome"`
	// Passed is the gate's decision (Outcome, with AllowNew applied).
	Passed bool `json:"passed"`
	// AllowNew says whether new and missing golden values were allowed.
	AllowNew bool `json:"allow_new"`
	// Fingerprint is what produced the results; GoldenFingerprint what
	// produced the golden files (of the first probe that has one).
	Fingerprint       Fingerprint  `json:"fingerprint"`
	GoldenFingerprint *Fingerprint `json:"golden_fingerprint,omitempty"`
	// Shard is the results' shard.
	Shard results.Shard `json:"shard"`
	// Probes are in suite order.
	Probes []*ProbeVerdict `json:"probes"`
	// Sensitivity holds per-unit sensitivity rows when bisect or a sweep ran.
	Sensitivity []Sensitivity `json:"sensitivity,omitempty"`
}

// A Fingerprint says what produced a result or a golden file.
type Fingerprint struct {
	BaseWeights      string `json:"base_weights,omitempty"`
	CandidateWeights string `json:"candidate_weights,omitempty"`
	Manifest         string `json:"manifest,omitempty"`
	Suite            string `json:"suite"`
	Probe            string `json:"probe,omitempty"`
	Tokenizer        string `json:"tokenizer,omitempty"`
	Harness          string `json:"harness"`
}

// A ProbeVerdict is one probe's comparison.
type ProbeVerdict struct {
	Name    string  `json:"name"`
	Kind    string  `json:"kind"`
	Outcome Outcome `json:"outcome"`
	// Note explains an error, a skip or a fingerprint change.
	Note string `json:"note,omitempty"`
	// Seconds is the probe's run time.
	Seconds float64 `json:"seconds"`
	// Metrics are the compared metrics: gated ones first, in suite order,
	// then the ungated ones (Gated false, outcome pass or new) by name.
	Metrics []*MetricVerdict `json:"metrics"`
	// Items is the number of items (or windows) compared.
	Items int `json:"items"`
	// Changes are the per-item differences from golden, in item order.
	Changes []ItemChange `json:"changes,omitempty"`
	// Units is the achieved sparsity per unit (sparsity probes).
	Units []results.Unit `json:"units,omitempty"`
}

// A MetricVerdict is one metric's comparison.
type MetricVerdict struct {
	Metric  string  `json:"metric"`
	Outcome Outcome `json:"outcome"`
	// Gated is false for metrics the suite records but does not gate.
	Gated bool `json:"gated"`
	// Better is "higher" or "lower".
	Better string `json:"better"`
	// Golden and Candidate are the values (nil when absent).
	Golden    *float64 `json:"golden,omitempty"`
	Candidate *float64 `json:"candidate,omitempty"`
	// Delta is Candidate − Golden.
	Delta *float64 `json:"delta,omitempty"`
	// Bound is the allowed worsening, max(abs, rel·|golden|).
	Bound float64 `json:"bound"`
	// Tolerance is the tolerance in words, e.g. "abs 0.02, mcnemar α=0.05, fail if both".
	Tolerance string `json:"tolerance"`
	// Test is the statistical test used ("" when none).
	Test string `json:"test,omitempty"`
	// Statistic and P are the test's statistic and p-value.
	Statistic *float64 `json:"statistic,omitempty"`
	P         *float64 `json:"p,omitempty"`
	// CILo and CIHi bound the bootstrap interval of the difference.
	CILo *float64 `json:"ci_lo,omitempty"`
	CIHi *float64 `json:"ci_hi,omitempty"`
	// Lost and Gained count items right→wrong and wrong→right against golden.
	Lost   int `json:"lost"`
	Gained int `json:"gained"`
	// PowerWarning, when set, says the probe is too small to detect its own
	// tolerance, with the smallest detectable change.
	PowerWarning string `json:"power_warning,omitempty"`
	// Nondeterministic marks measured timings.
	Nondeterministic bool `json:"nondeterministic,omitempty"`
	// Note explains the outcome in one line.
	Note string `json:"note,omitempty"`
}

// Change kinds of an ItemChange.
const (
	Lost    = "lost"    // right in golden, wrong now
	Gained  = "gained"  // wrong in golden, right now
	Changed = "changed" // same correctness, different choice or text
	Moved   = "moved"   // same choice, margin moved more than the report threshold
	Added   = "added"   // no golden record
	Dropped = "dropped" // golden record without a result
)

// An ItemChange is one item whose record differs from golden.
type ItemChange struct {
	ID     string `json:"id"`
	Index  int    `json:"index"`
	Change string `json:"change"`
	// Golden and candidate choice, margin and text, where the kind has them.
	GoldenChosen    *int     `json:"golden_chosen,omitempty"`
	CandidateChosen *int     `json:"candidate_chosen,omitempty"`
	GoldenMargin    *float64 `json:"golden_margin,omitempty"`
	CandidateMargin *float64 `json:"candidate_margin,omitempty"`
	GoldenText      *string  `json:"golden_text,omitempty"`
	CandidateText   *string  `json:"candidate_text,omitempty"`
	// GoldenNLL and CandidateNLL are window NLLs (perplexity).
	GoldenNLL    *float64 `json:"golden_nll,omitempty"`
	CandidateNLL *float64 `json:"candidate_nll,omitempty"`
}

// A Sensitivity row says how much one unit alone moves a probe's metric.
type Sensitivity struct {
	Probe     string `json:"probe"`
	Metric    string `json:"metric"`
	Layer     int    `json:"layer"`
	Component string `json:"component"`
	// Mode is "only-sparse" (this unit sparse, the rest dense) or
	// "only-dense" (this unit dense, the rest sparse).
	Mode  string  `json:"mode"`
	Value float64 `json:"value"`
	// Delta is Value minus the all-dense value (only-sparse) or the
	// all-sparse value (only-dense).
	Delta float64 `json:"delta"`
}

// EncodeVerdict returns v as indented JSON.
func EncodeVerdict(v *Verdict) ([]byte, error) {
	b, err := json.MarshalIndent(v, "", " ")
	if err != nil {
		return nil, fmt.Errorf("encoding verdict: %w", err)
	}
	return append(b, '\n'), nil
}

// LoadVerdict reads a verdict JSON file, refusing other schema versions,
// unknown fields and truncated files.
func LoadVerdict(path string) (*Verdict, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("reading verdict: %w", err)
	}
	return DecodeVerdict(path, data)
}

// DecodeVerdict parses verdict JSON read from file.
func DecodeVerdict(file string, data []byte) (*Verdict, error) {
	var head struct {
		Schema  *int            `json:"schema"`
		Outcome json.RawMessage `json:"outcome"`
		Shard   json.RawMessage `json:"shard"`
		Base    json.RawMessage `json:"base"`
	}
	if err := json.Unmarshal(data, &head); err != nil {
		return nil, fmt.Errorf("%s: not verdict JSON (truncated or corrupt?): %v", file, err)
	}
	if head.Outcome == nil && head.Shard != nil && head.Schema != nil {
		return nil, fmt.Errorf("%s: this is a results file (from 'run --results'), not a verdict; gate it with 'sparsegate compare --results %s --golden DIR', or write a verdict with 'run --json'", file, file)
	}
	if head.Schema == nil {
		return nil, fmt.Errorf("%s: no schema field; this is not a sparsegate verdict file", file)
	}
	if *head.Schema != VerdictSchema {
		return nil, fmt.Errorf("%s: verdict schema %d; this sparsegate reads schema %d (write the verdict again with this version)", file, *head.Schema, VerdictSchema)
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var v Verdict
	if err := dec.Decode(&v); err != nil {
		return nil, fmt.Errorf("%s: %v", file, err)
	}
	for i, p := range v.Probes {
		if p == nil {
			return nil, fmt.Errorf("%s: probes[%d] is null", file, i)
		}
		for j, m := range p.Metrics {
			if m == nil {
				return nil, fmt.Errorf("%s: probes[%d].metrics[%d] is null", file, i, j)
			}
		}
	}
	if _, ok := rank[v.Outcome]; !ok {
		return nil, fmt.Errorf("%s: outcome %q is not one of pass, improved, skipped, new, missing, fail, error", file, v.Outcome)
	}
	return &v, nil
}
