package sparsity

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"sparsegate/harness/atomicfile"
	"sparsegate/harness/checkpoint"
	"sparsegate/harness/jsonpos"
)

// Identification of the manifest format (see MANIFEST.md).
const (
	// ManifestFile is the manifest's file name inside a build directory.
	ManifestFile = "manifest.json"
	// FormatName is the value of the manifest's "format" field.
	FormatName = "sparsegate-build"
	// FormatVersion is the manifest version this sparsegate reads and writes.
	FormatVersion = 1
)

// A Manifest describes a sparse build: its dense base and, for every layer and
// component, the rule that chooses the units that run. It is what
// manifest.json holds (MANIFEST.md documents the file field by field).
type Manifest struct {
	// Format is FormatName; Save fills it when empty.
	Format string
	// Version is the format version; Save fills it when zero.
	Version int
	// Base names the dense checkpoint the build runs on.
	Base Base
	// Predictors is the file name, beside the manifest, of the safetensors
	// file holding the predictor weights; empty when no rule is a predictor.
	Predictors string
	// Layers holds one entry per layer of the base, each layer exactly once.
	Layers []LayerRules
}

// Base names a build's dense base checkpoint.
type Base struct {
	// Path is the base checkpoint directory, relative to the build directory.
	Path string
	// SHA256 is the base's weights digest, as checkpoint.Weights.SHA256 computes it.
	SHA256 string
}

// LayerRules holds one layer's rules.
type LayerRules struct {
	// Layer is the decoder block, from 0.
	Layer int
	// MLP chooses the MLP neurons that run.
	MLP Rule
	// Attention chooses the attention heads that run.
	Attention Rule
}

// Rule returns the layer's rule for component c.
func (l *LayerRules) Rule(c Component) *Rule {
	if c == MLP {
		return &l.MLP
	}
	return &l.Attention
}

// The manifest's JSON shape. Pointer fields tell "absent" from zero.
type (
	rawManifest struct {
		Format     *string    `json:"format"`
		Version    *int       `json:"version"`
		Base       *rawBase   `json:"base"`
		Predictors string     `json:"predictors,omitempty"`
		Layers     []rawLayer `json:"layers"`
	}
	rawBase struct {
		Path   string `json:"path"`
		SHA256 string `json:"sha256"`
	}
	rawLayer struct {
		Layer     *int     `json:"layer"`
		MLP       *rawRule `json:"mlp"`
		Attention *rawRule `json:"attention"`
	}
	rawRule struct {
		Mode        string          `json:"mode"`
		K           *int            `json:"k,omitempty"`
		Threshold   *float64        `json:"threshold,omitempty"`
		On          *string         `json:"on,omitempty"`
		Rank        *int            `json:"rank,omitempty"`
		Input       *string         `json:"input,omitempty"`
		Keep        *[]int          `json:"keep,omitempty"`
		Calibration *rawCalibration `json:"calibration,omitempty"`
	}
	rawCalibration struct {
		Recall       *float64 `json:"recall"`
		KeptFraction *float64 `json:"kept_fraction"`
		Tokens       int      `json:"tokens,omitempty"`
	}
)

// schemaKeys lists the keys an object of the given kind may hold, each with
// the kind of its value ("" for scalars and lists of scalars, "[kind]" for a
// list of objects). Unknown kinds hold no known keys.
func schemaKeys(kind string) map[string]string {
	switch kind {
	case "manifest":
		return map[string]string{"format": "", "version": "", "base": "base", "predictors": "", "layers": "[layer]"}
	case "base":
		return map[string]string{"path": "", "sha256": ""}
	case "layer":
		return map[string]string{"layer": "", "mlp": "rule", "attention": "rule"}
	case "rule":
		return map[string]string{"mode": "", "k": "", "threshold": "", "on": "", "rank": "", "input": "", "keep": "", "calibration": "calibration"}
	case "calibration":
		return map[string]string{"recall": "", "kept_fraction": "", "tokens": ""}
	}
	return nil
}

// An issue is one problem found in a manifest: where, which unit, what to do.
type issue struct {
	off   int64 // byte offset in the file, -1 when unknown
	place string
	msg   string
}

// issues renders problems as one error naming the file and each position.
func issuesError(file string, data []byte, list []issue) error {
	if len(list) == 0 {
		return nil
	}
	lines := make([]string, 0, len(list))
	for i, is := range list {
		if i == 8 {
			lines = append(lines, fmt.Sprintf("and %d more problems", len(list)-8))
			break
		}
		var b strings.Builder
		b.WriteString(file)
		if is.off >= 0 && data != nil {
			l, c := jsonpos.LineCol(data, is.off)
			fmt.Fprintf(&b, ":%d:%d", l, c)
		}
		if is.place != "" {
			b.WriteString(": " + is.place)
		}
		b.WriteString(": " + is.msg)
		lines = append(lines, b.String())
	}
	if len(lines) == 1 {
		return errors.New(lines[0])
	}
	return fmt.Errorf("%s: %d problems in the build manifest:\n  %s", file, len(list), strings.Join(lines, "\n  "))
}

// positions maps JSON paths ("layers[2].mlp") to the byte offsets of their values.
type positions map[string]int64

func (p positions) at(path string) int64 {
	if off, ok := p[path]; ok {
		return off
	}
	return -1
}

// LoadManifest reads DIR/manifest.json and checks what can be checked without
// the base checkpoint (see Open for the full check).
func LoadManifest(dir string) (*Manifest, error) {
	path := filepath.Join(dir, ManifestFile)
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("reading build manifest: %w; point at a build directory holding %s", err, ManifestFile)
	}
	m, pos, err := parseManifest(path, data)
	if err != nil {
		return nil, err
	}
	if err := issuesError(path, data, m.check(nil, pos)); err != nil {
		return nil, err
	}
	return m, nil
}

// parseManifest decodes the bytes of a manifest: JSON syntax, unknown fields,
// types, format and version. file names the source in errors.
func parseManifest(file string, data []byte) (*Manifest, positions, error) {
	fail := func(off int64, format string, args ...any) (*Manifest, positions, error) {
		return nil, nil, issuesError(file, data, []issue{{off: off, msg: fmt.Sprintf(format, args...)}})
	}
	if t := bytes.TrimLeft(data, " \t\r\n"); len(t) == 0 || t[0] != '{' {
		return fail(-1, "a build manifest must hold one JSON object ({...}); see MANIFEST.md")
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var raw rawManifest
	if err := dec.Decode(&raw); err != nil {
		var se *json.SyntaxError
		var te *json.UnmarshalTypeError
		switch {
		case errors.As(err, &se):
			return fail(se.Offset-1, "invalid JSON: %v; fix the syntax", err)
		case errors.As(err, &te):
			return fail(te.Offset-1, "field %q: wrong type: want %s, got JSON %s", te.Field, te.Type, te.Value)
		case errors.Is(err, io.ErrUnexpectedEOF):
			return fail(int64(len(data)), "the JSON ends early; close every object and list")
		case strings.HasPrefix(err.Error(), "json: unknown field "):
			if u, ok := findUnknown(data); ok {
				return fail(u.off, "field %q: unknown field; allowed here: %s", u.path, u.allowed)
			}
			return fail(-1, "%v; see MANIFEST.md for the fields", err)
		}
		return fail(-1, "%v", err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return fail(dec.InputOffset(), "unexpected data after the manifest object; a manifest holds one JSON object")
	}
	pos := walkPositions(data)
	switch {
	case raw.Format == nil:
		return fail(-1, "field \"format\" is missing; a build manifest starts with \"format\": %q", FormatName)
	case *raw.Format != FormatName:
		return fail(pos.at("format"), "format %q is not a sparsegate build manifest; expected %q", *raw.Format, FormatName)
	case raw.Version == nil:
		return fail(-1, "field \"version\" is missing; set it to %d", FormatVersion)
	case *raw.Version > FormatVersion:
		return fail(pos.at("version"), "format version %d was written by a newer sparsegate; this sparsegate reads version %d; upgrade sparsegate", *raw.Version, FormatVersion)
	case *raw.Version < 1:
		return fail(pos.at("version"), "format version %d is invalid; versions start at 1 and this sparsegate reads version %d", *raw.Version, FormatVersion)
	case raw.Base == nil:
		return fail(-1, "field \"base\" is missing; name the dense base with {\"path\": ..., \"sha256\": ...}")
	}
	m := &Manifest{Format: *raw.Format, Version: *raw.Version, Base: Base(*raw.Base), Predictors: raw.Predictors}
	var list []issue
	for i, rl := range raw.Layers {
		at := fmt.Sprintf("layers[%d]", i)
		if rl.Layer == nil {
			list = append(list, issue{pos.at(at), at, "field \"layer\" is missing; give the layer's index, from 0"})
			continue
		}
		lr := LayerRules{Layer: *rl.Layer}
		for _, c := range Components() {
			u := Unit{Layer: *rl.Layer, Component: c}
			rr := rl.MLP
			if c == Attention {
				rr = rl.Attention
			}
			if rr == nil {
				list = append(list, issue{pos.at(at), u.String(), fmt.Sprintf("field %q is missing; give a rule (use {\"mode\": \"dense\"} to run every unit)", c)})
				continue
			}
			r, errs := rr.rule()
			for _, e := range errs {
				list = append(list, issue{pos.at(at + "." + string(c)), u.String(), e})
			}
			if len(errs) > 0 {
				r.Mode = "invalid" // reported; keep check from repeating it
			}
			*lr.Rule(c) = r
		}
		m.Layers = append(m.Layers, lr)
	}
	if len(list) > 0 {
		return nil, nil, issuesError(file, data, list)
	}
	return m, pos, nil
}

// rule converts the JSON form, reporting fields that are missing for the mode
// or present but unused by it.
func (rr *rawRule) rule() (Rule, []string) {
	r := Rule{Mode: Mode(rr.Mode)}
	var errs []string
	present := map[string]bool{"k": rr.K != nil, "threshold": rr.Threshold != nil, "on": rr.On != nil,
		"rank": rr.Rank != nil, "input": rr.Input != nil, "keep": rr.Keep != nil}
	uses := map[Mode][]string{Oracle: {"k"}, Threshold: {"threshold", "on"}, PredictorMode: {"k", "rank", "input"}, Static: {"keep"}}
	if _, known := uses[r.Mode]; known || r.Mode == Dense {
		for _, f := range uses[r.Mode] {
			if !present[f] {
				errs = append(errs, fmt.Sprintf("mode %s needs field %q; see MANIFEST.md", r.Mode, f))
			}
			delete(present, f)
		}
		var extra []string
		for _, f := range []string{"k", "threshold", "on", "rank", "input", "keep"} {
			if present[f] {
				extra = append(extra, f)
			}
		}
		if len(extra) > 0 {
			errs = append(errs, fmt.Sprintf("mode %s does not use %s; remove them or change the mode", r.Mode, strings.Join(extra, ", ")))
		}
	}
	if len(errs) > 0 {
		return r, errs
	}
	switch r.Mode {
	case Oracle:
		r.K = *rr.K
	case Threshold:
		r.Threshold, r.On = *rr.Threshold, *rr.On
	case PredictorMode:
		r.K, r.Rank, r.Input = *rr.K, *rr.Rank, *rr.Input
	case Static:
		r.Keep = *rr.Keep // non-nil: "keep": null decodes as absent
	}
	if c := rr.Calibration; c != nil {
		if c.Recall == nil || c.KeptFraction == nil {
			errs = append(errs, "calibration needs both recall and kept_fraction")
		} else {
			r.Calibration = &Calibration{Recall: *c.Recall, KeptFraction: *c.KeptFraction, Tokens: c.Tokens}
		}
	}
	return r, errs
}

// raw converts a rule to its JSON form.
func (r Rule) raw() *rawRule {
	rr := &rawRule{Mode: string(r.Mode)}
	switch r.Mode {
	case Oracle:
		rr.K = &r.K
	case Threshold:
		rr.Threshold, rr.On = &r.Threshold, &r.On
	case PredictorMode:
		rr.K, rr.Rank, rr.Input = &r.K, &r.Rank, &r.Input
	case Static:
		keep := r.Keep
		if keep == nil {
			keep = []int{}
		}
		rr.Keep = &keep
	}
	if c := r.Calibration; c != nil {
		rr.Calibration = &rawCalibration{Recall: &c.Recall, KeptFraction: &c.KeptFraction, Tokens: c.Tokens}
	}
	return rr
}

// check validates the manifest; with cfg it also checks the layers and widths
// against the base's config. pos locates problems in the file (may be nil).
func (m *Manifest) check(cfg *checkpoint.Config, pos positions) []issue {
	var list []issue
	add := func(off int64, place, format string, args ...any) {
		list = append(list, issue{off, place, fmt.Sprintf(format, args...)})
	}
	if m.Base.Path == "" {
		add(pos.at("base"), "base", "path is empty; give the base checkpoint directory, relative to the build directory")
	}
	if !isHexDigest(m.Base.SHA256) {
		add(pos.at("base"), "base", "sha256 %q is not a 64-digit lower-case hex digest; copy the value `sparsegate inspect` prints for the base", m.Base.SHA256)
	}
	if p := m.Predictors; p != "" && (filepath.Base(p) != p || p == "." || p == "..") {
		add(pos.at("predictors"), "predictors", "%q must be a file name beside the manifest, without directories", p)
	}
	seen := map[int]int{} // layer → index in Layers
	for i, lr := range m.Layers {
		at := fmt.Sprintf("layers[%d]", i)
		switch {
		case lr.Layer < 0 || (cfg != nil && lr.Layer >= cfg.Layers):
			if cfg != nil {
				add(pos.at(at), at, "layer %d does not exist; the base has layers 0 to %d", lr.Layer, cfg.Layers-1)
			} else {
				add(pos.at(at), at, "layer %d is negative; layers count from 0", lr.Layer)
			}
			continue
		}
		if j, dup := seen[lr.Layer]; dup {
			add(pos.at(at), fmt.Sprintf("layer %d", lr.Layer), "listed twice (layers[%d] and layers[%d]); keep one entry per layer", j, i)
			continue
		}
		seen[lr.Layer] = i
		for _, c := range Components() {
			u := Unit{Layer: lr.Layer, Component: c}
			r := *lr.Rule(c)
			if r.Mode == "invalid" {
				continue
			}
			width := 0
			if cfg != nil {
				width = unitWidth(cfg, c)
			}
			for _, e := range r.check(u, width) {
				add(pos.at(at+"."+string(c)), u.String(), "%s", e)
			}
			if r.Mode == PredictorMode && m.Predictors == "" {
				add(pos.at(at+"."+string(c)), u.String(), "mode predictor needs the manifest's \"predictors\" file; name the safetensors file beside the manifest")
			}
		}
	}
	n := len(m.Layers)
	if cfg != nil {
		if n != cfg.Layers {
			add(pos.at("layers"), "layers", "%d layers listed but the base config.json has %d; list every layer exactly once", n, cfg.Layers)
		}
		n = cfg.Layers
	} else {
		for l := range seen {
			n = max(n, l+1)
		}
	}
	for l := 0; l < n; l++ {
		if _, ok := seen[l]; !ok {
			add(pos.at("layers"), fmt.Sprintf("layer %d", l), "missing; add an entry (use {\"mode\": \"dense\"} rules to leave it dense)")
		}
	}
	return list
}

// unitWidth is the number of units of component c.
func unitWidth(cfg *checkpoint.Config, c Component) int {
	if c == MLP {
		return cfg.FFN
	}
	return cfg.Heads
}

func isHexDigest(s string) bool {
	if len(s) != 64 {
		return false
	}
	for _, c := range s {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f') {
			return false
		}
	}
	return true
}

// Save writes m as DIR/manifest.json, atomically, layers in ascending order.
// It refuses a manifest that fails the checks that need no base checkpoint.
func (m *Manifest) Save(dir string) error {
	path := filepath.Join(dir, ManifestFile)
	c := *m
	if c.Format == "" {
		c.Format = FormatName
	}
	if c.Version == 0 {
		c.Version = FormatVersion
	}
	if c.Format != FormatName || c.Version != FormatVersion {
		return fmt.Errorf("%s: cannot write format %q version %d; this sparsegate writes %q version %d", path, c.Format, c.Version, FormatName, FormatVersion)
	}
	if err := issuesError(path, nil, c.check(nil, nil)); err != nil {
		return err
	}
	b, err := c.MarshalJSON()
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return atomicfile.WriteFile(path, b)
}

// MarshalJSON encodes the manifest in its file layout: indented, one line per
// rule, layers in ascending order (so a diff of two manifests reads per unit).
func (m *Manifest) MarshalJSON() ([]byte, error) {
	var b bytes.Buffer
	str := func(s string) string { v, _ := json.Marshal(s); return string(v) }
	fmt.Fprintf(&b, "{\n  \"format\": %s,\n  \"version\": %d,\n", str(m.Format), m.Version)
	fmt.Fprintf(&b, "  \"base\": {\"path\": %s, \"sha256\": %s},\n", str(m.Base.Path), str(m.Base.SHA256))
	if m.Predictors != "" {
		fmt.Fprintf(&b, "  \"predictors\": %s,\n", str(m.Predictors))
	}
	layers := slices.Clone(m.Layers)
	slices.SortStableFunc(layers, func(a, b LayerRules) int { return a.Layer - b.Layer })
	b.WriteString("  \"layers\": [")
	for i, lr := range layers {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, "\n    {\n      \"layer\": %d,\n", lr.Layer)
		for j, c := range Components() {
			rule, err := json.Marshal(lr.Rule(c).raw())
			if err != nil {
				return nil, fmt.Errorf("layer %d %s: %w", lr.Layer, c, err)
			}
			sep := ","
			if j == 1 {
				sep = ""
			}
			fmt.Fprintf(&b, "      %s: %s%s\n", str(string(c)), rule, sep)
		}
		b.WriteString("    }")
	}
	b.WriteString("\n  ]\n}\n")
	return b.Bytes(), nil
}

// WriteSummary prints the manifest for people: the base, then one line per
// layer component with its rule and calibration record.
func (m *Manifest) WriteSummary(w io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "base %s sha256 %s\n", m.Base.Path, m.Base.SHA256)
	if m.Predictors != "" {
		fmt.Fprintf(&b, "predictors %s\n", m.Predictors)
	}
	layers := slices.Clone(m.Layers)
	slices.SortStableFunc(layers, func(a, b LayerRules) int { return a.Layer - b.Layer })
	for _, lr := range layers {
		for _, c := range Components() {
			r := lr.Rule(c)
			fmt.Fprintf(&b, "%-22s %s", Unit{lr.Layer, c}.String(), r.String())
			if cal := r.Calibration; cal != nil {
				fmt.Fprintf(&b, "  calibration: recall %.4f kept %.4f", cal.Recall, cal.KeptFraction)
				if cal.Tokens > 0 {
					fmt.Fprintf(&b, " over %d tokens", cal.Tokens)
				}
			}
			b.WriteByte('\n')
		}
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// A walker visits a manifest's JSON tokens, recording where each value starts
// and the first key the schema does not know.
type walker struct {
	data    []byte
	dec     *json.Decoder
	pos     positions
	unknown *unknownKey
}

// unknownKey is the first key outside the schema: its path, offset and the
// keys allowed in its object.
type unknownKey struct {
	path    string
	off     int64
	allowed string
}

// walkPositions maps every JSON path of a valid manifest to its value's offset.
func walkPositions(data []byte) positions {
	w := &walker{data: data, dec: json.NewDecoder(bytes.NewReader(data)), pos: positions{}}
	_ = w.value("", "manifest") // data already decoded once; an error only shortens the map
	return w.pos
}

// findUnknown locates the first key the manifest schema does not allow.
func findUnknown(data []byte) (unknownKey, bool) {
	w := &walker{data: data, dec: json.NewDecoder(bytes.NewReader(data)), pos: positions{}}
	_ = w.value("", "manifest")
	if w.unknown == nil {
		return unknownKey{}, false
	}
	return *w.unknown, true
}

// next skips whitespace and separators from off.
func (w *walker) next(off int64) int64 {
	for off < int64(len(w.data)) && strings.IndexByte(" \t\r\n:,", w.data[off]) >= 0 {
		off++
	}
	return off
}

func (w *walker) value(path, kind string) error {
	w.pos[path] = w.next(w.dec.InputOffset())
	tok, err := w.dec.Token()
	if err != nil {
		return err
	}
	d, ok := tok.(json.Delim)
	if !ok {
		return nil
	}
	switch d {
	case '{':
		keys := schemaKeys(kind)
		for w.dec.More() {
			off := w.next(w.dec.InputOffset())
			kt, err := w.dec.Token()
			if err != nil {
				return err
			}
			key, _ := kt.(string)
			p := key
			if path != "" {
				p = path + "." + key
			}
			sub, known := keys[key]
			if keys != nil && !known && w.unknown == nil {
				names := make([]string, 0, len(keys))
				for k := range keys {
					names = append(names, k)
				}
				slices.Sort(names)
				w.unknown = &unknownKey{path: p, off: off, allowed: strings.Join(names, ", ")}
			}
			if err := w.value(p, sub); err != nil {
				return err
			}
		}
	case '[':
		elem := ""
		if strings.HasPrefix(kind, "[") {
			elem = strings.Trim(kind, "[]")
		}
		for i := 0; w.dec.More(); i++ {
			if err := w.value(fmt.Sprintf("%s[%d]", path, i), elem); err != nil {
				return err
			}
		}
	}
	_, err = w.dec.Token() // the closing delimiter
	return err
}
