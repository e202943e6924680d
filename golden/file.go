package golden

import (
	"bufio"
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"sparsegate/harness/results"
	"sparsegate/suites"
)

// FileVersion is the golden file format version this package reads and writes.
const FileVersion = 1

// Ext is the golden files' extension: DIR/<probe>.golden.
const Ext = ".golden"

// A File is one probe's golden record: what an approved build produced.
//
// # Format
//
// A golden file is UTF-8 text, one record per line, fields separated by
// single spaces, strings quoted as Go quotes them (so control characters and
// invalid UTF-8 stay visible and safe), floats in their shortest round-trip
// form (strconv 'g', -1), so re-recording the same results writes the same
// bytes and a review diff shows exactly what moved:
//
//	sparsegate-golden 1
//	probe "lookup-mc"
//	kind choice
//	fingerprint base_weights 5d41…
//	fingerprint candidate_weights 5d41…
//	fingerprint manifest 9a0f…
//	fingerprint suite 77c2…
//	fingerprint probe 0b1e…
//	fingerprint tokenizer 3c44…
//	fingerprint harness "0.1.0"
//	metric accuracy 0.95
//	metric margin_mean 2.0625
//	item "lookup-0000" index=0 chosen=3 margin=1.5 correct=1 base_correct=1
//	item "w0000" index=0 nll=301.25 tokens=255 bytes=700
//	item "status-0003" index=3 correct=1 prefix=1 text=" on time"
//	item "w0001" index=1 agree=120 kl=0.001,0.0004
//	unit 0 mlp kept=0.3 recall=0.99 rule="predictor k=154"
//
// Records come in that order: header, probe, kind, fingerprints (written in
// fixed order), metrics (sorted by name), items (in the results' order, item
// index order for a run), units (in the results' order). Parse enforces the
// record order and the metric order; unknown records or fields, unknown
// kinds, duplicate metrics, fingerprints or item ids are errors naming the
// file and line. FORMAT.md beside this package describes every field.
type File struct {
	// Probe and Kind name the probe.
	Probe, Kind string
	// Fingerprint says what produced the record.
	Fingerprint Fingerprint
	// Metrics are sorted by name; Nondeterministic metrics are marked.
	Metrics []results.Metric
	// Items are the per-item records in item order.
	Items []results.Item
	// Units are the per-unit sparsity records.
	Units []results.Unit
}

// Metric returns the named metric, or nil.
func (f *File) Metric(name string) *results.Metric {
	for i := range f.Metrics {
		if f.Metrics[i].Name == name {
			return &f.Metrics[i]
		}
	}
	return nil
}

// Path returns the golden file of a probe in dir.
func Path(dir, probe string) string { return filepath.Join(dir, probe+Ext) }

func ff(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func b01(v bool) string {
	if v {
		return "1"
	}
	return "0"
}

// Encode returns the file's bytes.
func (f *File) Encode() ([]byte, error) {
	var b bytes.Buffer
	fmt.Fprintf(&b, "sparsegate-golden %d\nprobe %s\nkind %s\n", FileVersion, strconv.Quote(f.Probe), f.Kind)
	fp := f.Fingerprint
	for _, kv := range [][2]string{{"base_weights", fp.BaseWeights}, {"candidate_weights", fp.CandidateWeights}, {"manifest", fp.Manifest},
		{"suite", fp.Suite}, {"probe", fp.Probe}, {"tokenizer", fp.Tokenizer}} {
		if kv[1] != "" {
			fmt.Fprintf(&b, "fingerprint %s %s\n", kv[0], kv[1])
		}
	}
	fmt.Fprintf(&b, "fingerprint harness %s\n", strconv.Quote(fp.Harness))
	ms := slices.Clone(f.Metrics)
	slices.SortFunc(ms, func(a, b results.Metric) int { return strings.Compare(a.Name, b.Name) })
	for _, m := range ms {
		if math.IsNaN(m.Value) || math.IsInf(m.Value, 0) {
			return nil, fmt.Errorf("probe %q: metric %s is %v; a golden value must be finite", f.Probe, m.Name, m.Value)
		}
		fmt.Fprintf(&b, "metric %s %s", m.Name, ff(m.Value))
		if m.Nondeterministic {
			b.WriteString(" nondeterministic")
		}
		b.WriteByte('\n')
	}
	for _, it := range f.Items {
		if err := finiteItem(&it); err != nil {
			return nil, fmt.Errorf("probe %q: item %q: %v; a golden value must be finite", f.Probe, it.ID, err)
		}
		fmt.Fprintf(&b, "item %s index=%d", strconv.Quote(it.ID), it.Index)
		if it.Chosen != nil {
			fmt.Fprintf(&b, " chosen=%d", *it.Chosen)
		}
		if it.Margin != nil {
			fmt.Fprintf(&b, " margin=%s", ff(*it.Margin))
		}
		if it.Correct != nil {
			fmt.Fprintf(&b, " correct=%s", b01(*it.Correct))
		}
		if it.BaseCorrect != nil {
			fmt.Fprintf(&b, " base_correct=%s", b01(*it.BaseCorrect))
		}
		if it.Prefix != nil {
			fmt.Fprintf(&b, " prefix=%s", b01(*it.Prefix))
		}
		if it.NLL != nil {
			fmt.Fprintf(&b, " nll=%s", ff(*it.NLL))
		}
		if it.Tokens != nil {
			fmt.Fprintf(&b, " tokens=%d", *it.Tokens)
		}
		if it.Bytes != nil {
			fmt.Fprintf(&b, " bytes=%d", *it.Bytes)
		}
		if it.Agree != nil {
			fmt.Fprintf(&b, " agree=%d", *it.Agree)
		}
		if it.KL != nil {
			parts := make([]string, len(it.KL))
			for i, v := range it.KL {
				parts[i] = ff(v)
			}
			fmt.Fprintf(&b, " kl=%s", strings.Join(parts, ","))
		}
		if it.Text != nil {
			fmt.Fprintf(&b, " text=%s", strconv.Quote(*it.Text))
		}
		b.WriteByte('\n')
	}
	for _, u := range f.Units {
		if !finite(u.Kept) || (u.Recall != nil && !finite(*u.Recall)) {
			return nil, fmt.Errorf("probe %q: unit %d %s has a non-finite kept fraction or recall; a golden value must be finite", f.Probe, u.Layer, u.Component)
		}
		fmt.Fprintf(&b, "unit %d %s kept=%s", u.Layer, u.Component, ff(u.Kept))
		if u.Recall != nil {
			fmt.Fprintf(&b, " recall=%s", ff(*u.Recall))
		}
		fmt.Fprintf(&b, " rule=%s\n", strconv.Quote(u.Rule))
	}
	return b.Bytes(), nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// finiteItem reports the first non-finite float of an item.
func finiteItem(it *results.Item) error {
	switch {
	case it.Margin != nil && !finite(*it.Margin):
		return fmt.Errorf("margin is %v", *it.Margin)
	case it.NLL != nil && !finite(*it.NLL):
		return fmt.Errorf("nll is %v", *it.NLL)
	}
	for i, v := range it.KL {
		if !finite(v) {
			return fmt.Errorf("kl[%d] is %v", i, v)
		}
	}
	return nil
}

// MaxFileBytes caps a golden file (a probe's per-item records).
const MaxFileBytes = 256 << 20

// ReadFile reads and parses a golden file.
func ReadFile(path string) (*File, error) {
	st, err := os.Lstat(path)
	if err != nil {
		return nil, fmt.Errorf("reading golden file: %w", err)
	}
	if st.Mode()&os.ModeSymlink != 0 {
		return nil, fmt.Errorf("%s is a symbolic link; golden files must be regular files inside the golden directory", path)
	}
	if st.Size() > MaxFileBytes {
		return nil, fmt.Errorf("%s has %d bytes, more than the %d a golden file may have", path, st.Size(), MaxFileBytes)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("reading golden file: %w", err)
	}
	return Parse(path, data)
}

// Parse parses a golden file's bytes; errors name file and line.
func Parse(file string, data []byte) (*File, error) {
	sc := bufio.NewScanner(bytes.NewReader(data))
	sc.Buffer(make([]byte, 64<<10), MaxFileBytes)
	f := &File{}
	line := 0
	fail := func(format string, args ...any) error {
		return fmt.Errorf("%s:%d: %s; the golden file is damaged or hand-edited: restore it from version control or re-record it with 'sparsegate golden update'", file, line, fmt.Sprintf(format, args...))
	}
	stage := 0 // 0 header, 1 probe, 2 kind, 3 body
	// Body records come in this order; section is the rank of the last one.
	order := map[string]int{"fingerprint": 1, "metric": 2, "item": 3, "unit": 4}
	section := 0
	seenFP := map[string]bool{}
	itemLine := map[string]int{}
	for sc.Scan() {
		line++
		text := sc.Text()
		key, rest, _ := strings.Cut(text, " ")
		switch {
		case stage == 0:
			if key != "sparsegate-golden" {
				return nil, fail("the first line must be \"sparsegate-golden %d\", not %.40q", FileVersion, text)
			}
			v, err := strconv.Atoi(rest)
			if err != nil {
				return nil, fail("bad format version %q", rest)
			}
			if v != FileVersion {
				if v > FileVersion {
					return nil, fmt.Errorf("%s:%d: golden format %d was written by a newer sparsegate; this one reads format %d: upgrade sparsegate", file, line, v, FileVersion)
				}
				return nil, fail("golden format %d is not supported", v)
			}
			stage = 1
		case stage == 1:
			if key != "probe" {
				return nil, fail("expected the probe line, got %.40q", text)
			}
			s, err := strconv.Unquote(rest)
			if err != nil {
				return nil, fail("the probe name must be a quoted string")
			}
			f.Probe, stage = s, 2
		case stage == 2:
			if key != "kind" || rest == "" {
				return nil, fail("expected the kind line, got %.40q", text)
			}
			if !slices.Contains(suites.Kinds(), rest) {
				return nil, fail("unknown probe kind %.40q (kinds are %s)", rest, strings.Join(suites.Kinds(), ", "))
			}
			f.Kind, stage = rest, 3
		case order[key] != 0 && order[key] < section:
			return nil, fail("a %s record after the %s records; records come in the order fingerprint, metric, item, unit", key, []string{"", "fingerprint", "metric", "item", "unit"}[section])
		case key == "fingerprint":
			section = 1
			name, _, _ := strings.Cut(rest, " ")
			if seenFP[name] {
				return nil, fail("fingerprint %.40s is listed twice", name)
			}
			seenFP[name] = true
			if err := f.parseFingerprint(rest); err != nil {
				return nil, fail("%v", err)
			}
		case key == "metric":
			m, err := parseMetric(rest)
			if err != nil {
				return nil, fail("%v", err)
			}
			section = 2
			if f.Metric(m.Name) != nil {
				return nil, fail("metric %s is listed twice", m.Name)
			}
			if n := len(f.Metrics); n > 0 && f.Metrics[n-1].Name > m.Name {
				return nil, fail("metric %s comes after metric %s; metrics are sorted by name", m.Name, f.Metrics[n-1].Name)
			}
			f.Metrics = append(f.Metrics, m)
		case key == "item":
			section = 3
			it, err := parseItem(rest)
			if err != nil {
				return nil, fail("%v", err)
			}
			if first, dup := itemLine[it.ID]; dup {
				return nil, fail("item %q appears twice (first on line %d)", it.ID, first)
			}
			itemLine[it.ID] = line
			f.Items = append(f.Items, it)
		case key == "unit":
			section = 4
			u, err := parseUnit(rest)
			if err != nil {
				return nil, fail("%v", err)
			}
			f.Units = append(f.Units, u)
		default:
			return nil, fail("unknown record %q (records are fingerprint, metric, item, unit)", key)
		}
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s:%d: %v", file, line+1, err)
	}
	if stage < 3 {
		line++
		return nil, fail("the file ends before its header, probe and kind lines")
	}
	return f, nil
}

func (f *File) parseFingerprint(rest string) error {
	k, v, ok := strings.Cut(rest, " ")
	if !ok || v == "" {
		return fmt.Errorf("fingerprint needs a name and a value")
	}
	fp := &f.Fingerprint
	dst := map[string]*string{"base_weights": &fp.BaseWeights, "candidate_weights": &fp.CandidateWeights, "manifest": &fp.Manifest,
		"suite": &fp.Suite, "probe": &fp.Probe, "tokenizer": &fp.Tokenizer, "harness": &fp.Harness}[k]
	if dst == nil {
		return fmt.Errorf("unknown fingerprint %q", k)
	}
	if k == "harness" {
		s, err := strconv.Unquote(v)
		if err != nil {
			return fmt.Errorf("fingerprint harness must be a quoted string")
		}
		v = s
	} else if !isHex(v) {
		return fmt.Errorf("fingerprint %s %.20q is not a hex digest", k, v)
	}
	*dst = v
	return nil
}

func isHex(s string) bool {
	if len(s) == 0 || len(s) > 128 {
		return false
	}
	for _, c := range s {
		if !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f') {
			return false
		}
	}
	return true
}

func parseFloat(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%.30q is not a finite number", s)
	}
	return v, nil
}

func parseMetric(rest string) (results.Metric, error) {
	parts := strings.Split(rest, " ")
	if len(parts) < 2 || len(parts) > 3 || (len(parts) == 3 && parts[2] != "nondeterministic") {
		return results.Metric{}, fmt.Errorf("a metric line is 'metric NAME VALUE [nondeterministic]'")
	}
	v, err := parseFloat(parts[1])
	if err != nil {
		return results.Metric{}, fmt.Errorf("metric %s: %v", parts[0], err)
	}
	return results.Metric{Name: parts[0], Value: v, Nondeterministic: len(parts) == 3}, nil
}

// fields splits `"id" k=v k="quoted" …` into the leading quoted string and
// the key/value pairs, in order.
func fields(rest string) (string, [][2]string, error) {
	lead, tail, err := quotedPrefix(rest)
	if err != nil {
		return "", nil, err
	}
	var kv [][2]string
	for tail != "" {
		if tail[0] != ' ' {
			return "", nil, fmt.Errorf("fields must be separated by one space")
		}
		tail = tail[1:]
		k, v, ok := strings.Cut(tail, "=")
		if !ok || k == "" || strings.Contains(k, " ") {
			return "", nil, fmt.Errorf("expected key=value, got %.30q", tail)
		}
		tail = v
		if strings.HasPrefix(v, `"`) {
			q, t, err := quotedPrefix(v)
			if err != nil {
				return "", nil, fmt.Errorf("%s: %v", k, err)
			}
			kv = append(kv, [2]string{k, q})
			tail = t
			continue
		}
		val, t, found := strings.Cut(v, " ")
		if found {
			t = " " + t
		}
		kv = append(kv, [2]string{k, val})
		tail = t
	}
	return lead, kv, nil
}

// quotedPrefix unquotes the Go-quoted string at the start of s.
func quotedPrefix(s string) (string, string, error) {
	q, err := strconv.QuotedPrefix(s)
	if err != nil {
		return "", "", fmt.Errorf("expected a quoted string at %.30q", s)
	}
	v, err := strconv.Unquote(q)
	if err != nil {
		return "", "", err
	}
	return v, s[len(q):], nil
}

func parseItem(rest string) (results.Item, error) {
	id, kv, err := fields(rest)
	it := results.Item{ID: id}
	if err != nil {
		return it, fmt.Errorf("item: %v", err)
	}
	if id == "" {
		return it, fmt.Errorf("item: empty id")
	}
	seen := map[string]bool{}
	for _, p := range kv {
		k, v := p[0], p[1]
		if seen[k] {
			return it, fmt.Errorf("item %q: field %s twice", id, k)
		}
		seen[k] = true
		bad := func(err error) error { return fmt.Errorf("item %q: %s: %v", id, k, err) }
		switch k {
		case "index", "chosen", "tokens", "bytes", "agree":
			n, err := strconv.Atoi(v)
			if err != nil || n < 0 {
				return it, bad(fmt.Errorf("%.20q is not a count", v))
			}
			switch k {
			case "index":
				it.Index = n
			case "chosen":
				it.Chosen = &n
			case "tokens":
				it.Tokens = &n
			case "bytes":
				it.Bytes = &n
			case "agree":
				it.Agree = &n
			}
		case "correct", "base_correct", "prefix":
			if v != "0" && v != "1" {
				return it, bad(fmt.Errorf("use 0 or 1"))
			}
			b := v == "1"
			switch k {
			case "correct":
				it.Correct = &b
			case "base_correct":
				it.BaseCorrect = &b
			default:
				it.Prefix = &b
			}
		case "margin", "nll":
			x, err := parseFloat(v)
			if err != nil {
				return it, bad(err)
			}
			if k == "margin" {
				it.Margin = &x
			} else {
				it.NLL = &x
			}
		case "kl":
			it.KL = []float64{}
			if v != "" {
				for _, s := range strings.Split(v, ",") {
					x, err := parseFloat(s)
					if err != nil {
						return it, bad(err)
					}
					it.KL = append(it.KL, x)
				}
			}
		case "text":
			t := v
			it.Text = &t
		default:
			return it, fmt.Errorf("item %q: unknown field %q", id, k)
		}
	}
	if !seen["index"] {
		return it, fmt.Errorf("item %q: no index", id)
	}
	return it, nil
}

func parseUnit(rest string) (results.Unit, error) {
	var u results.Unit
	ls, tail, ok := strings.Cut(rest, " ")
	layer, err := strconv.Atoi(ls)
	if !ok || err != nil || layer < 0 {
		return u, fmt.Errorf("a unit line is 'unit LAYER COMPONENT kept=… [recall=…] rule=\"…\"'")
	}
	comp, tail, ok := strings.Cut(tail, " ")
	if !ok || (comp != "mlp" && comp != "attention") {
		return u, fmt.Errorf("unit %d: component must be mlp or attention", layer)
	}
	u.Layer, u.Component = layer, comp
	_, kv, err := fields(`""` + " " + tail)
	if err != nil {
		return u, fmt.Errorf("unit %d %s: %v", layer, comp, err)
	}
	for _, p := range kv {
		switch p[0] {
		case "kept", "recall":
			x, err := parseFloat(p[1])
			if err != nil {
				return u, fmt.Errorf("unit %d %s: %s: %v", layer, comp, p[0], err)
			}
			if p[0] == "kept" {
				u.Kept = x
			} else {
				u.Recall = &x
			}
		case "rule":
			u.Rule = p[1]
		default:
			return u, fmt.Errorf("unit %d %s: unknown field %q", layer, comp, p[0])
		}
	}
	return u, nil
}

// FromResults makes the golden record of one probe of Results.
func FromResults(r *results.Results, p *results.Probe) *File {
	return &File{Probe: p.Name, Kind: p.Kind, Fingerprint: FingerprintOf(r, p), Metrics: slices.Clone(p.Metrics),
		Items: slices.Clone(p.Items), Units: slices.Clone(p.Units)}
}

// FingerprintOf returns the fingerprint of one probe of Results.
func FingerprintOf(r *results.Results, p *results.Probe) Fingerprint {
	fp := Fingerprint{Suite: r.Suite.Hash, Harness: r.Harness}
	if p != nil {
		fp.Probe = p.Hash
	}
	if r.Base != nil {
		fp.BaseWeights, fp.Tokenizer = r.Base.WeightsHash, r.Base.TokenizerHash
	}
	if r.Candidate != nil {
		fp.CandidateWeights, fp.Manifest, fp.Tokenizer = r.Candidate.WeightsHash, r.Candidate.ManifestHash, r.Candidate.TokenizerHash
		if r.Base == nil {
			fp.BaseWeights = ""
		}
	}
	return fp
}
