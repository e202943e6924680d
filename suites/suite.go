// Package suites reads suite files: versioned YAML files that name the probes
// a release gate runs, each with its kind, its data files (relative to the
// suite file), its parameters and the tolerance of every metric it gates.
//
// # Format
//
// A suite file is YAML with these top-level fields (FORMAT.md beside this
// package documents every field with a complete example):
//
//	format: 1            # the suite format version; this package reads 1
//	name: demo           # the suite's name, used for golden directories
//	about: "..."         # free text
//	probes: [...]        # the probes, in the order they run
//
// Every error names the file and the line and column of the offending value,
// says what is wrong and how to fix it, e.g.
//
//	gate.yaml:14:7: probe "lookup": unknown field "shot"; did you mean "shots"?
//
// Anchors and aliases are refused (a suite is small and is read by people;
// aliases only hide expansion bombs), as are data paths that leave the suite's
// directory.
package suites

import (
	"io/fs"
)

// FormatVersion is the suite format version this package reads and writes.
const FormatVersion = 1

// Probe kinds.
const (
	Perplexity = "perplexity" // sliding-window perplexity of a text
	Choice     = "choice"     // few-shot multiple choice on JSON Lines items
	Generation = "generation" // few-shot greedy generation on JSON Lines items
	Drift      = "drift"      // next-token distribution of the candidate against the base
	Flips      = "flips"      // items whose correctness differs between base and candidate
	Sparsity   = "sparsity"   // achieved kept fraction and predictor recall
	Speed      = "speed"      // prefill and decode tokens/s, base and candidate
)

// Kinds lists every probe kind, in documentation order.
func Kinds() []string {
	return []string{Perplexity, Choice, Generation, Drift, Flips, Sparsity, Speed}
}

// A Suite is a parsed, validated suite file.
type Suite struct {
	// Name is the suite's name.
	Name string
	// About is free text.
	About string
	// File is the path the suite was read from ("builtin:demo/suite.yaml" for
	// a built-in suite).
	File string
	// Probes are the probes in file order.
	Probes []*Probe
	// Hash is the SHA-256 (hex) of the suite file and every data file it
	// names, in probe order.
	Hash string
	// FS holds the suite's directory: data paths are read from it.
	FS fs.FS
}

// Probe returns the probe with the given name, or nil.
func (s *Suite) Probe(name string) *Probe {
	for _, p := range s.Probes {
		if p.Name == name {
			return p
		}
	}
	return nil
}

// A Probe is one probe of a suite. Which fields apply depends on Kind; the
// parser rejects fields that do not apply.
type Probe struct {
	// Name is unique within the suite ([a-z0-9][a-z0-9._-]*).
	Name string
	// Kind is one of the kind constants.
	Kind string
	// About is free text.
	About string

	// Text is the text file of perplexity, drift, sparsity and speed probes
	// (speed takes its prompt from it).
	Text string
	// MaxBytes, when > 0, scores only the text's first MaxBytes bytes (cut
	// back to a line end).
	MaxBytes int
	// Window and Stride are the sliding window (tokens) of perplexity, drift
	// and sparsity probes.
	Window, Stride int

	// Items and Pool are the JSON Lines files of choice and generation
	// probes: the scored items and the few-shot examples.
	Items, Pool string
	// Shots is the number of few-shot examples before each item.
	Shots int
	// Seed draws the few-shot examples.
	Seed uint64
	// Limit, when > 0, uses only the first Limit items.
	Limit int
	// Separator joins the few-shot examples and the item (default "\n\n").
	Separator string
	// Score picks the option score that gates a choice probe: "total" or
	// "per-byte" log-likelihood.
	Score string
	// MaxTokens caps generated tokens (generation) or decoded tokens (speed).
	MaxTokens int
	// Stop are the stop strings of a generation probe.
	Stop []string

	// Of names the choice and generation probes whose items a flips probe
	// counts; empty means all of them.
	Of []string

	// PromptTokens is the prefill length of a speed probe.
	PromptTokens int
	// Repeats is how many interleaved measurements a speed probe takes.
	Repeats int

	// Gate holds the tolerance of each gated metric, in file order.
	Gate []Tolerance

	// Hash is the SHA-256 (hex) of the probe's definition and data files.
	Hash string
	// Line and Col locate the probe in the suite file.
	Line, Col int
}

// Tolerance returns the probe's tolerance for metric, or nil when the probe
// does not gate it.
func (p *Probe) Tolerance(metric string) *Tolerance {
	for i := range p.Gate {
		if p.Gate[i].Metric == metric {
			return &p.Gate[i]
		}
	}
	return nil
}

// DataFiles returns the data files the probe reads, relative to the suite.
func (p *Probe) DataFiles() []string {
	var out []string
	for _, f := range []string{p.Text, p.Items, p.Pool} {
		if f != "" {
			out = append(out, f)
		}
	}
	return out
}
