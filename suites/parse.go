package suites

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"
)

// MaxSuiteBytes caps a suite file's size: suites are short files people read.
const MaxSuiteBytes = 1 << 20

// An Error is a problem at one place of a suite file.
type Error struct {
	// File is the suite file's path.
	File string
	// Line and Col are the 1-based place of the problem (0 when unknown;
	// Col alone may be 0 when only the line is known).
	Line, Col int
	// Msg says what is wrong and how to fix it.
	Msg string
}

// Error returns "file:line:col: msg", leaving out the parts that are unknown.
func (e *Error) Error() string {
	switch {
	case e.Line == 0:
		return fmt.Sprintf("%s: %s", e.File, e.Msg)
	case e.Col == 0:
		return fmt.Sprintf("%s:%d: %s", e.File, e.Line, e.Msg)
	}
	return fmt.Sprintf("%s:%d:%d: %s", e.File, e.Line, e.Col, e.Msg)
}

// Load reads and validates the suite file at path; its data files are read
// from the file's directory and must stay inside it (symbolic links included).
func Load(file string) (*Suite, error) {
	st, err := os.Stat(file)
	if err != nil {
		return nil, fmt.Errorf("reading suite: %w; pass a suite file or a built-in suite name (%s)", err, strings.Join(Builtin(), ", "))
	}
	if st.IsDir() {
		return nil, fmt.Errorf("%s is a directory; pass the suite file inside it", file)
	}
	if st.Size() > MaxSuiteBytes {
		return nil, &Error{File: file, Msg: fmt.Sprintf("the file has %d bytes, more than the %d a suite file may have; split the probes' data into data files", st.Size(), MaxSuiteBytes)}
	}
	data, err := os.ReadFile(file)
	if err != nil {
		return nil, fmt.Errorf("reading suite: %w", err)
	}
	dir := filepath.Dir(file)
	return Parse(file, data, os.DirFS(dir), func(rel string) error { return insideDir(dir, rel) })
}

// insideDir reports an error when dir/rel resolves (through symbolic links)
// outside dir.
func insideDir(dir, rel string) error {
	root, err := filepath.EvalSymlinks(dir)
	if err != nil {
		return err
	}
	full, err := filepath.EvalSymlinks(filepath.Join(dir, filepath.FromSlash(rel)))
	if err != nil {
		return err
	}
	r, err := filepath.Rel(root, full)
	if err != nil || r == ".." || strings.HasPrefix(r, ".."+string(filepath.Separator)) {
		return fmt.Errorf("resolves to %s, outside the suite's directory %s", full, root)
	}
	return nil
}

// Parse validates a suite file's bytes. Data files are read from fsys (the
// suite's directory); check, when not nil, vets each data path further (Load
// uses it to refuse symbolic links that leave the directory).
func Parse(file string, data []byte, fsys fs.FS, check func(rel string) error) (*Suite, error) {
	p := &parser{file: file, fsys: fsys, check: check}
	s := p.parse(data)
	if len(p.errs) > 0 {
		return nil, p.err()
	}
	h := sha256.New()
	fmt.Fprintf(h, "sparsegate-suite %d\n%d\n", FormatVersion, len(data))
	h.Write(data)
	for _, pr := range s.Probes {
		ph := sha256.New()
		def, _ := json.Marshal(pr.definition())
		ph.Write(def)
		for _, f := range pr.DataFiles() {
			// Streamed: a data file is hashed without being held in memory.
			if err := hashFile(fsys, f, ph, h); err != nil {
				return nil, &Error{File: file, Line: pr.Line, Col: pr.Col, Msg: fmt.Sprintf("probe %q: reading %s: %v", pr.Name, f, err)}
			}
		}
		pr.Hash = hex.EncodeToString(ph.Sum(nil))
	}
	s.Hash = hex.EncodeToString(h.Sum(nil))
	s.File, s.FS = file, fsys
	return s, nil
}

// hashFile writes "\nNAME SIZE\n" and the file's bytes to the probe hash
// and "NAME SIZE\n" and the bytes to the suite hash, streaming.
func hashFile(fsys fs.FS, name string, probe, suite io.Writer) error {
	f, err := fsys.Open(name)
	if err != nil {
		return err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return err
	}
	fmt.Fprintf(probe, "\n%s %d\n", name, st.Size())
	fmt.Fprintf(suite, "%s %d\n", name, st.Size())
	n, err := io.Copy(io.MultiWriter(probe, suite), f)
	if err == nil && n != st.Size() {
		err = fmt.Errorf("the file changed size while it was read (%d of %d bytes)", n, st.Size())
	}
	return err
}

// definition is what a probe's hash covers: everything that changes what it
// computes. Tolerances are left out, so tightening a gate keeps cached base
// results and golden values valid.
func (p *Probe) definition() any {
	return []any{p.Name, p.Kind, p.Text, p.MaxBytes, p.Window, p.Stride, p.Items, p.Pool, p.Shots, p.Seed,
		p.Limit, p.Separator, p.Score, p.MaxTokens, p.Stop, p.Of, p.PromptTokens, p.Repeats}
}

type parser struct {
	file  string
	fsys  fs.FS
	check func(string) error
	errs  []*Error
}

const maxErrors = 20

func (p *parser) errorf(n *yaml.Node, format string, args ...any) {
	if len(p.errs) >= maxErrors {
		return
	}
	e := &Error{File: p.file, Msg: fmt.Sprintf(format, args...)}
	if n != nil {
		e.Line, e.Col = n.Line, n.Column
	}
	p.errs = append(p.errs, e)
}

func (p *parser) err() error {
	es := make([]error, len(p.errs))
	for i, e := range p.errs {
		es[i] = e
	}
	if len(es) == 1 {
		return es[0]
	}
	return errors.Join(es...)
}

var nameRE = regexp.MustCompile(`^[a-z0-9][a-z0-9._-]{0,63}$`)

func (p *parser) parse(data []byte) *Suite {
	s := &Suite{}
	if !utf8Valid(data) {
		off := InvalidUTF8At(data)
		line := 1 + bytes.Count(data[:off], []byte("\n"))
		col := off - bytes.LastIndexByte(data[:off], '\n')
		p.errorf(&yaml.Node{Line: line, Column: col}, "the file is not valid UTF-8 (byte offset %d); save it as UTF-8", off)
		return s
	}
	var doc yaml.Node
	dec := yaml.NewDecoder(bytes.NewReader(data))
	if err := dec.Decode(&doc); err != nil {
		if errors.Is(err, io.EOF) {
			p.errorf(nil, "the file is empty; a suite needs format, name and probes")
			return s
		}
		p.yamlError(err)
		return s
	}
	var extra yaml.Node
	if err := dec.Decode(&extra); err == nil {
		p.errorf(&extra, "a second YAML document; a suite file holds one document")
	}
	if len(doc.Content) == 0 {
		p.errorf(nil, "the file is empty; a suite needs format, name and probes")
		return s
	}
	root := doc.Content[0]
	if p.noAliases(root, 0) {
		return s
	}
	fields := p.mappingLabelled(root, "the suite", []string{"format", "name", "about", "probes"}, []string{"format", "name", "probes"})
	if fields == nil {
		return s
	}
	if n := fields["format"]; n != nil {
		if v, ok := p.integer(n, "format"); ok && v != FormatVersion {
			p.errorf(n, "format %d is not supported; this sparsegate reads suite format %d (a newer sparsegate may read it)", v, FormatVersion)
		}
	}
	if n := fields["name"]; n != nil {
		s.Name, _ = p.str(n, "name")
		if s.Name != "" && !nameRE.MatchString(s.Name) {
			p.errorf(n, "name %q: use lower-case letters, digits, '.', '_' and '-' (it names the golden directory)", s.Name)
		}
	}
	if n := fields["about"]; n != nil {
		s.About, _ = p.str(n, "about")
	}
	if n := fields["probes"]; n != nil {
		if n.Kind != yaml.SequenceNode {
			p.errorf(n, "probes must be a list of probes (each starting with '- name: ...')")
			return s
		}
		if len(n.Content) == 0 {
			p.errorf(n, "probes is empty; add at least one probe")
		}
		seen := map[string]*yaml.Node{}
		for _, pn := range n.Content {
			pr := p.probe(pn)
			if pr == nil {
				continue
			}
			if first, dup := seen[pr.Name]; dup {
				p.errorf(pn, "probe %q is defined twice (first at line %d); give each probe its own name", pr.Name, first.Line)
				continue
			}
			seen[pr.Name] = pn
			s.Probes = append(s.Probes, pr)
		}
		for i, pr := range s.Probes {
			if pr.Kind != Flips {
				continue
			}
			for _, of := range pr.Of {
				o := s.Probe(of)
				switch {
				case o == nil || (o.Kind != Choice && o.Kind != Generation):
					p.errorf(&yaml.Node{Line: pr.Line, Column: pr.Col}, "probe %q: of names %q, which is not a choice or generation probe of this suite", pr.Name, of)
				case !slices.Contains(s.Probes[:i], o):
					p.errorf(&yaml.Node{Line: pr.Line, Column: pr.Col}, "probe %q: of names %q, which comes after it; move the flips probe below the probes it counts", pr.Name, of)
				}
			}
		}
	}
	return s
}

var yamlLineRE = regexp.MustCompile(`^line (\d+): (.*)$`)

// yamlError records a YAML syntax error, at its line when the decoder names
// one.
func (p *parser) yamlError(err error) {
	msg := strings.TrimPrefix(err.Error(), "yaml: ")
	var at *yaml.Node
	if m := yamlLineRE.FindStringSubmatch(msg); m != nil {
		if line, err := strconv.Atoi(m[1]); err == nil {
			at, msg = &yaml.Node{Line: line}, m[2]
		}
	}
	if strings.Contains(msg, "anchor") {
		msg += "; anchors and aliases (&, *) are not allowed in suite files, write the value out"
	}
	p.errorf(at, "not valid YAML: %s", msg)
}

// noAliases refuses anchors, aliases and absurd nesting anywhere.
func (p *parser) noAliases(n *yaml.Node, depth int) bool {
	if depth > 32 {
		p.errorf(n, "nesting deeper than 32 levels; a suite file is shallow, check the indentation")
		return true
	}
	if n.Kind == yaml.AliasNode || n.Anchor != "" {
		p.errorf(n, "anchors and aliases (&, *) are not allowed in suite files; write the value out")
		return true
	}
	for _, c := range n.Content {
		if p.noAliases(c, depth+1) {
			return true
		}
	}
	return false
}

// kindFields lists the fields each kind accepts besides name, kind, about, gate.
var kindFields = map[string][]string{
	Perplexity: {"text", "max_bytes", "window", "stride"},
	Drift:      {"text", "max_bytes", "window", "stride"},
	Sparsity:   {"text", "max_bytes", "window", "stride"},
	Choice:     {"items", "pool", "shots", "seed", "limit", "separator", "score"},
	Generation: {"items", "pool", "shots", "seed", "limit", "separator", "max_tokens", "stop"},
	Flips:      {"of"},
	Speed:      {"text", "prompt_tokens", "max_tokens", "repeats"},
}

var kindRequired = map[string][]string{
	Perplexity: {"text"}, Drift: {"text"}, Sparsity: {"text"}, Speed: {"text"},
	Choice: {"items"}, Generation: {"items"},
}

func (p *parser) probe(n *yaml.Node) *Probe {
	if n.Kind != yaml.MappingNode {
		p.errorf(n, "a probe must be a mapping with at least name and kind")
		return nil
	}
	// Read name and kind first: they decide which fields are allowed.
	pr := &Probe{Line: n.Line, Col: n.Column}
	var kindNode *yaml.Node
	for i := 0; i+1 < len(n.Content); i += 2 {
		switch n.Content[i].Value {
		case "name":
			pr.Name, _ = p.str(n.Content[i+1], "name")
		case "kind":
			kindNode = n.Content[i+1]
			pr.Kind, _ = p.str(kindNode, "kind")
		}
	}
	label := "probe"
	if pr.Name != "" {
		label = fmt.Sprintf("probe %q", pr.Name)
		if !nameRE.MatchString(pr.Name) {
			p.errorf(n, "%s: use lower-case letters, digits, '.', '_' and '-' in probe names (they name golden files)", label)
		}
	}
	allowed := []string{"name", "kind", "about", "gate"}
	if kindNode != nil {
		extra, ok := kindFields[pr.Kind]
		if !ok {
			p.errorf(kindNode, "%s: unknown kind %q%s; kinds are %s", label, pr.Kind, suggest(pr.Kind, Kinds()), strings.Join(Kinds(), ", "))
			return nil
		}
		allowed = append(allowed, extra...)
	}
	fields := p.mappingLabelled(n, label, allowed, append([]string{"name", "kind"}, kindRequired[pr.Kind]...))
	if fields == nil || pr.Name == "" || kindNode == nil {
		return nil
	}
	pr.Separator, pr.Score, pr.Seed = "\n\n", "total", 1
	switch pr.Kind {
	case Generation:
		pr.MaxTokens, pr.Stop = 16, []string{"\n"}
	case Speed:
		pr.PromptTokens, pr.MaxTokens, pr.Repeats = 128, 32, 5
	}
	for _, key := range fieldOrder(n) {
		v := fields[key]
		switch key {
		case "about":
			pr.About, _ = p.str(v, label+": about")
		case "text":
			pr.Text = p.dataPath(v, label, "text")
		case "items":
			pr.Items = p.dataPath(v, label, "items")
		case "pool":
			pr.Pool = p.dataPath(v, label, "pool")
		case "max_bytes":
			pr.MaxBytes = p.count(v, label, key, 1, math.MaxInt32)
		case "window":
			pr.Window = p.count(v, label, key, 2, 1<<20)
		case "stride":
			pr.Stride = p.count(v, label, key, 1, 1<<20)
		case "shots":
			pr.Shots = p.count(v, label, key, 0, 64)
		case "seed":
			if s, ok := p.integer(v, label+": seed"); ok {
				if s < 0 {
					p.errorf(v, "%s: seed must not be negative", label)
				}
				pr.Seed = uint64(s)
			}
		case "limit":
			pr.Limit = p.count(v, label, key, 1, math.MaxInt32)
		case "separator":
			pr.Separator, _ = p.str(v, label+": separator")
		case "score":
			pr.Score, _ = p.str(v, label+": score")
			if pr.Score != "total" && pr.Score != "per-byte" {
				p.errorf(v, "%s: score %q: use total (sum of the option's token log-likelihoods) or per-byte (that sum divided by the option's bytes)", label, pr.Score)
			}
		case "max_tokens":
			pr.MaxTokens = p.count(v, label, key, 1, 4096)
		case "stop":
			pr.Stop = p.strings(v, label, key)
			for _, s := range pr.Stop {
				if s == "" {
					p.errorf(v, "%s: stop strings must not be empty", label)
				}
			}
		case "of":
			pr.Of = p.strings(v, label, key)
		case "prompt_tokens":
			pr.PromptTokens = p.count(v, label, key, 1, 1<<16)
		case "repeats":
			pr.Repeats = p.count(v, label, key, 1, 101)
		case "gate":
			pr.Gate = p.gate(v, label, pr.Kind)
		}
	}
	if pr.Window > 0 && pr.Stride >= pr.Window {
		p.errorf(fields["stride"], "%s: stride %d must be less than the window %d (each window scores the tokens past the previous one)", label, pr.Stride, pr.Window)
	}
	if pr.Stride > 0 && pr.Window == 0 {
		p.errorf(fields["stride"], "%s: a stride needs a window; set window too", label)
	}
	if (pr.Kind == Choice || pr.Kind == Generation) && pr.Shots > 0 && pr.Pool == "" {
		p.errorf(fields["shots"], "%s: %d shots need a pool of solved examples; set pool to a JSON Lines file", label, pr.Shots)
	}
	return pr
}

func (p *parser) gate(n *yaml.Node, label, kind string) []Tolerance {
	if n.Kind != yaml.MappingNode {
		p.errorf(n, "%s: gate must map metric names to tolerances, e.g. 'accuracy: {abs: 0.02}'", label)
		return nil
	}
	var names []string
	for _, m := range Metrics(kind) {
		names = append(names, m.Name)
	}
	var out []Tolerance
	seen := map[string]bool{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		info, ok := Metric(kind, k.Value)
		if !ok {
			p.errorf(k, "%s: gate: a %s probe has no metric %q%s; its metrics are %s", label, kind, k.Value, suggest(k.Value, names), strings.Join(names, ", "))
			continue
		}
		if seen[k.Value] {
			p.errorf(k, "%s: gate: metric %q is listed twice", label, k.Value)
			continue
		}
		seen[k.Value] = true
		t := DefaultTolerance(info)
		t.Line, t.Col = k.Line, k.Column
		ml := fmt.Sprintf("%s: gate: %s", label, k.Value)
		if v.Kind == yaml.ScalarNode && (v.Tag == "!!null" || v.Value == "") {
			out = append(out, t)
			continue
		}
		fields := p.mappingLabelled(v, ml, []string{"better", "abs", "rel", "max_flips", "max_flip_fraction", "test", "alpha", "power", "resamples", "fail_if"}, nil)
		if fields == nil {
			continue
		}
		explicitFail := false
		for _, key := range fieldOrder(v) {
			fv := fields[key]
			switch key {
			case "better":
				t.Better, _ = p.str(fv, ml+": better")
				if t.Better != HigherIsBetter && t.Better != LowerIsBetter {
					p.errorf(fv, "%s: better %q: use higher or lower", ml, t.Better)
				}
			case "abs":
				t.Abs = p.bound(fv, ml, key, math.Inf(1))
			case "rel":
				t.Rel = p.bound(fv, ml, key, math.Inf(1))
			case "max_flips":
				t.MaxFlips = p.count(fv, ml, key, 0, math.MaxInt32)
			case "max_flip_fraction":
				t.MaxFlipFraction = p.bound(fv, ml, key, 1)
			case "test":
				t.Test, _ = p.str(fv, ml+": test")
				if !knownTest(info, t.Test) {
					p.errorf(fv, "%s: test %q does not apply to %s; use %s", ml, t.Test, info.Name, strings.Join(append([]string{TestNone}, info.Tests...), " or "))
				}
			case "alpha":
				t.Alpha = p.unit(fv, ml, key)
			case "power":
				t.Power = p.unit(fv, ml, key)
			case "resamples":
				t.Resamples = p.count(fv, ml, key, 1000, 1000000)
			case "fail_if":
				explicitFail = true
				t.FailIf, _ = p.str(fv, ml+": fail_if")
				switch t.FailIf {
				case FailIfLarge, FailIfSignificant, FailIfBoth, FailIfEither:
				default:
					p.errorf(fv, "%s: fail_if %q: use large, significant, both or either", ml, t.FailIf)
				}
			}
		}
		if (fields["max_flips"] != nil || fields["max_flip_fraction"] != nil) && !slices.Contains(info.Tests, TestMcNemar) {
			p.errorf(k, "%s: flip caps apply to per-item right/wrong metrics (accuracy, exact_match, prefix_match), not %s", ml, info.Name)
		}
		if t.Test != TestNone && !explicitFail {
			t.FailIf = FailIfBoth
		}
		if t.Test == TestNone && (t.FailIf == FailIfSignificant || t.FailIf == FailIfBoth) {
			p.errorf(fields["fail_if"], "%s: fail_if %s needs a statistical test; set test to %s", ml, t.FailIf, strings.Join(info.Tests, " or "))
		}
		out = append(out, t)
	}
	return out
}

// mappingLabelled checks that n is a mapping with only allowed keys and the
// required ones, and returns the values by key; label names it in errors.
func (p *parser) mappingLabelled(n *yaml.Node, label string, allowed, required []string) map[string]*yaml.Node {
	if n.Kind != yaml.MappingNode {
		p.errorf(n, "%s must be a mapping of fields (%s)", label, strings.Join(allowed, ", "))
		return nil
	}
	out := map[string]*yaml.Node{}
	ok := true
	for i := 0; i+1 < len(n.Content); i += 2 {
		k := n.Content[i]
		if k.Kind != yaml.ScalarNode {
			p.errorf(k, "%s: field names must be plain words", label)
			ok = false
			continue
		}
		if !slices.Contains(allowed, k.Value) {
			p.errorf(k, "%s: unknown field %q%s; fields here are %s", label, k.Value, suggest(k.Value, allowed), strings.Join(allowed, ", "))
			ok = false
			continue
		}
		if _, dup := out[k.Value]; dup {
			p.errorf(k, "%s: field %q is given twice; keep one", label, k.Value)
			ok = false
			continue
		}
		out[k.Value] = n.Content[i+1]
	}
	for _, r := range required {
		if out[r] == nil {
			p.errorf(n, "%s: missing field %q", label, r)
			ok = false
		}
	}
	if !ok {
		return nil
	}
	return out
}

// fieldOrder returns the keys of a mapping node in file order, so that
// problems are reported in the order they appear (map order is random).
func fieldOrder(n *yaml.Node) []string {
	var out []string
	for i := 0; i+1 < len(n.Content); i += 2 {
		if k := n.Content[i].Value; !slices.Contains(out, k) {
			out = append(out, k)
		}
	}
	return out
}

func (p *parser) str(n *yaml.Node, label string) (string, bool) {
	if n.Kind != yaml.ScalarNode || n.Tag == "!!null" {
		p.errorf(n, "%s must be a string", label)
		return "", false
	}
	if n.Tag != "!!str" {
		p.errorf(n, "%s must be a string, not %s; quote it", label, strings.TrimPrefix(n.Tag, "!!"))
		return "", false
	}
	return n.Value, true
}

func (p *parser) strings(n *yaml.Node, label, key string) []string {
	if n.Kind == yaml.ScalarNode {
		s, ok := p.str(n, label+": "+key)
		if !ok {
			return nil
		}
		return []string{s}
	}
	if n.Kind != yaml.SequenceNode {
		p.errorf(n, "%s: %s must be a string or a list of strings", label, key)
		return nil
	}
	var out []string
	for _, c := range n.Content {
		if s, ok := p.str(c, label+": "+key+" entries"); ok {
			out = append(out, s)
		}
	}
	return out
}

func (p *parser) integer(n *yaml.Node, label string) (int64, bool) {
	if n.Kind != yaml.ScalarNode || n.Tag != "!!int" {
		p.errorf(n, "%s must be a whole number, not %q", label, n.Value)
		return 0, false
	}
	v, err := strconv.ParseInt(strings.ReplaceAll(n.Value, "_", ""), 0, 64)
	if err != nil {
		p.errorf(n, "%s: %q is not a whole number in range", label, n.Value)
		return 0, false
	}
	return v, true
}

func (p *parser) count(n *yaml.Node, label, key string, lo, hi int64) int {
	v, ok := p.integer(n, label+": "+key)
	if !ok {
		return 0
	}
	if v < lo || v > hi {
		p.errorf(n, "%s: %s %d is out of range; use %d to %d", label, key, v, lo, hi)
		return 0
	}
	return int(v)
}

func (p *parser) number(n *yaml.Node, label string) (float64, bool) {
	if n.Kind != yaml.ScalarNode || (n.Tag != "!!int" && n.Tag != "!!float") {
		p.errorf(n, "%s must be a number, not %q", label, n.Value)
		return 0, false
	}
	v, err := strconv.ParseFloat(strings.ReplaceAll(n.Value, "_", ""), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		p.errorf(n, "%s: %q is not a finite number", label, n.Value)
		return 0, false
	}
	return v, true
}

func (p *parser) bound(n *yaml.Node, label, key string, hi float64) float64 {
	v, ok := p.number(n, label+": "+key)
	if !ok {
		return 0
	}
	if v < 0 || v > hi {
		if v < 0 {
			p.errorf(n, "%s: %s %v is negative; a bound is how far the metric may worsen, 0 or more", label, key, v)
		} else {
			p.errorf(n, "%s: %s %v is above %v", label, key, v, hi)
		}
		return 0
	}
	return v
}

func (p *parser) unit(n *yaml.Node, label, key string) float64 {
	v, ok := p.number(n, label+": "+key)
	if !ok {
		return 0
	}
	if v <= 0 || v >= 1 {
		p.errorf(n, "%s: %s %v must be strictly between 0 and 1", label, key, v)
		return 0.5
	}
	return v
}

// dataPath checks a data path: relative, slash-separated, inside the suite's
// directory, naming a regular file.
func (p *parser) dataPath(n *yaml.Node, label, key string) string {
	s, ok := p.str(n, label+": "+key)
	if !ok {
		return ""
	}
	switch {
	case s == "":
		p.errorf(n, "%s: %s is empty; name a file relative to the suite file", label, key)
		return ""
	case path.IsAbs(s) || filepath.IsAbs(s) || strings.Contains(s, `\`) || (len(s) > 1 && s[1] == ':'):
		p.errorf(n, "%s: %s %q is absolute; data paths are relative to the suite file's directory (copy the file next to the suite)", label, key, s)
		return ""
	case !fs.ValidPath(s):
		p.errorf(n, "%s: %s %q leaves the suite's directory or is not clean; data paths stay inside it (no '..', no './', no empty parts)", label, key, s)
		return ""
	}
	st, err := fs.Stat(p.fsys, s)
	if err != nil {
		p.errorf(n, "%s: %s %q: no such file next to the suite; check the path (relative to the suite file)", label, key, s)
		return ""
	}
	if !st.Mode().IsRegular() {
		p.errorf(n, "%s: %s %q is not a regular file", label, key, s)
		return ""
	}
	if p.check != nil {
		if err := p.check(s); err != nil {
			p.errorf(n, "%s: %s %q %v; data must stay inside the suite's directory", label, key, s, err)
			return ""
		}
	}
	return s
}

// suggest returns "; did you mean %q?" for the closest candidate, or "".
func suggest(got string, candidates []string) string {
	best, bestD := "", 3
	for _, c := range candidates {
		if d := editDistance(got, c); d < bestD || (d == bestD && best == "" && d <= len(c)/3) {
			if d <= max(1, len(c)/3) {
				best, bestD = c, d
			}
		}
	}
	if best == "" {
		return ""
	}
	return fmt.Sprintf(" (did you mean %q?)", best)
}

func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			c := prev[j-1]
			if a[i-1] != b[j-1] {
				c++
			}
			cur[j] = min(c, prev[j]+1, cur[j-1]+1)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}
