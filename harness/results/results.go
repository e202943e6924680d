// Package results holds Results, the one data structure a suite run produces
// and golden files, reporters and bisect consume, and its JSON form.
//
// Results serialise with a schema version, fields in a fixed order and every
// float in its shortest round-trip form, so the same run writes the same
// bytes. Speed metrics are the one non-deterministic part and are marked.
package results

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"

	"sparsegate/harness/atomicfile"
)

// Schema is the Results JSON schema version this package writes and reads.
const Schema = 1

// Probe statuses.
const (
	Ran     = "ran"     // the probe ran; its metrics are valid
	Skipped = "skipped" // not run here (another shard's, or it needs a build that was not given)
	Failed  = "error"   // the probe could not run; Error says why; the gate fails
)

// Results are what one run of a suite produced.
type Results struct {
	// Schema is the JSON schema version.
	Schema int `json:"schema"`
	// Harness is the sparsegate version that ran.
	Harness string `json:"harness"`
	// Suite identifies the suite.
	Suite SuiteRef `json:"suite"`
	// Base and Candidate describe the builds (nil when not given).
	Base      *Build `json:"base,omitempty"`
	Candidate *Build `json:"candidate,omitempty"`
	// Shard is which slice of the items this run covered.
	Shard Shard `json:"shard"`
	// Probes are in suite order.
	Probes []*Probe `json:"probes"`
}

// A SuiteRef names a suite and pins its contents.
type SuiteRef struct {
	Name string `json:"name"`
	File string `json:"file"`
	Hash string `json:"hash"`
}

// A Build describes one model a suite ran on.
type Build struct {
	// Path is the directory it was loaded from.
	Path string `json:"path"`
	// Kind is "checkpoint" (dense or pruned weights) or "sparse" (a manifest).
	Kind string `json:"kind"`
	// WeightsHash is the SHA-256 of the checkpoint's weights (the base's for a
	// sparse build).
	WeightsHash string `json:"weights_hash"`
	// ManifestHash is the SHA-256 of a sparse build's manifest and predictor
	// weights ("" for checkpoints).
	ManifestHash string `json:"manifest_hash,omitempty"`
	// TokenizerHash is the SHA-256 of the tokenizer files.
	TokenizerHash string `json:"tokenizer_hash"`
	// Dense lists units forced dense for this run (bisect), as "layer L mlp".
	Dense []string `json:"dense,omitempty"`
}

// Shard is a 1-based shard index and the shard count (1/1 when unsharded).
type Shard struct {
	Index int `json:"index"`
	Count int `json:"count"`
}

// A Probe is one probe's outcome.
type Probe struct {
	Name string `json:"name"`
	Kind string `json:"kind"`
	// Hash is the probe definition's hash (suites.Probe.Hash).
	Hash string `json:"hash"`
	// Status is Ran, Skipped or Failed.
	Status string `json:"status"`
	// Note says why a probe was skipped or failed.
	Note string `json:"note,omitempty"`
	// Subject is which build the metrics describe: "candidate" or "base".
	Subject string `json:"subject,omitempty"`
	// Seconds is the wall time the probe took.
	Seconds float64 `json:"seconds"`
	// Metrics are sorted by name.
	Metrics []Metric `json:"metrics"`
	// Items are the per-item records, in the data's order.
	Items []Item `json:"items,omitempty"`
	// Units are per-unit sparsity records (sparsity probes).
	Units []Unit `json:"units,omitempty"`
}

// Metric returns the named metric, or nil.
func (p *Probe) Metric(name string) *Metric {
	for i := range p.Metrics {
		if p.Metrics[i].Name == name {
			return &p.Metrics[i]
		}
	}
	return nil
}

// A Metric is one named value.
type Metric struct {
	Name  string  `json:"name"`
	Value float64 `json:"value"`
	// Nondeterministic marks measured timings.
	Nondeterministic bool `json:"nondeterministic,omitempty"`
}

// An Item is one scored unit of a probe: a multiple-choice or generation
// item, or a window of a perplexity or drift text. Which fields are set
// depends on the probe kind.
type Item struct {
	// ID is the item's id, or "w0007" for the eighth window.
	ID string `json:"id"`
	// Index is the item's position in the unsharded data.
	Index int `json:"index"`

	// Chosen is the option the scoring picked (choice).
	Chosen *int `json:"chosen,omitempty"`
	// Margin is the gating score of the best option minus the second best (choice).
	Margin *float64 `json:"margin,omitempty"`
	// Correct says whether the subject got it right (choice, generation).
	Correct *bool `json:"correct,omitempty"`
	// Prefix says whether the generated text starts with the target (generation).
	Prefix *bool `json:"prefix,omitempty"`
	// Text is the generated text (generation).
	Text *string `json:"text,omitempty"`
	// BaseCorrect is the base's outcome when both builds ran (choice, generation).
	BaseCorrect *bool `json:"base_correct,omitempty"`

	// NLL is the window's total negative log-likelihood in nats, Tokens the
	// targets it scored and Bytes their text bytes (perplexity).
	NLL    *float64 `json:"nll,omitempty"`
	Tokens *int     `json:"tokens,omitempty"`
	Bytes  *int     `json:"bytes,omitempty"`

	// KL holds each scored token's KL(base ‖ candidate) and Agree how many of
	// them have the same top-1 token (drift).
	KL    []float64 `json:"kl,omitempty"`
	Agree *int      `json:"agree,omitempty"`
}

// A Unit is the achieved sparsity of one layer component.
type Unit struct {
	Layer     int    `json:"layer"`
	Component string `json:"component"`
	// Rule is the build's rule for the unit, as text.
	Rule string `json:"rule"`
	// Kept is the mean fraction of the component computed per token.
	Kept float64 `json:"kept"`
	// Recall is the mean recall against the oracle set of the same size
	// (absent for dense units).
	Recall *float64 `json:"recall,omitempty"`
}

// Probe returns the named probe, or nil.
func (r *Results) Probe(name string) *Probe {
	for _, p := range r.Probes {
		if p.Name == name {
			return p
		}
	}
	return nil
}

// Check verifies what JSON cannot: no NaN or infinite metric values.
func (r *Results) Check() error {
	for _, p := range r.Probes {
		for _, m := range p.Metrics {
			if math.IsNaN(m.Value) || math.IsInf(m.Value, 0) {
				return fmt.Errorf("probe %q: metric %s is %v", p.Name, m.Name, m.Value)
			}
		}
	}
	return nil
}

// Encode writes r as indented JSON.
func (r *Results) Encode(w io.Writer) error {
	if err := r.Check(); err != nil {
		return fmt.Errorf("results cannot be written: %w", err)
	}
	b, err := json.MarshalIndent(r, "", " ")
	if err != nil {
		return err
	}
	_, err = w.Write(append(b, '\n'))
	return err
}

// Save writes r to path atomically, creating its directory when missing.
func (r *Results) Save(path string) error {
	var buf bytes.Buffer
	if err := r.Encode(&buf); err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return fmt.Errorf("making the directory for %s: %w", path, err)
	}
	return atomicfile.WriteFile(path, buf.Bytes())
}

// Load reads Results JSON, refusing other schema versions and unknown fields.
func Load(path string) (*Results, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("reading results: %w", err)
	}
	return Decode(path, data)
}

// Decode parses Results JSON read from file.
func Decode(file string, data []byte) (*Results, error) {
	var head struct {
		Schema *int `json:"schema"`
	}
	if err := json.Unmarshal(data, &head); err != nil {
		return nil, fmt.Errorf("%s: not results JSON: %v", file, err)
	}
	if head.Schema == nil {
		return nil, fmt.Errorf("%s: no schema field; this is not a sparsegate results file", file)
	}
	if *head.Schema != Schema {
		return nil, fmt.Errorf("%s: results schema %d; this sparsegate reads schema %d (re-run the suite with this version)", file, *head.Schema, Schema)
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var r Results
	if err := dec.Decode(&r); err != nil {
		return nil, fmt.Errorf("%s: %v", file, err)
	}
	for i, p := range r.Probes {
		if p == nil {
			return nil, fmt.Errorf("%s: probes[%d] is null", file, i)
		}
		// Empty lists are written as absent: read them the same way, so
		// decode → encode → decode is a fixed point.
		if len(p.Items) == 0 {
			p.Items = nil
		}
		if len(p.Units) == 0 {
			p.Units = nil
		}
		for j := range p.Items {
			if len(p.Items[j].KL) == 0 {
				p.Items[j].KL = nil
			}
		}
	}
	return &r, nil
}
