// Package inspect describes a checkpoint directory: its family and sizes, the
// dtypes and shapes of its tensors layer by layer, its tokenizer, the SHA-256
// of its weights, and any NaN or infinite weights.
package inspect

import (
	"fmt"
	"io"
	"path/filepath"
	"regexp"
	"slices"
	"sort"
	"strconv"
	"strings"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
)

// A Report is what Inspect found.
type Report struct {
	// Dir is the checkpoint directory.
	Dir string
	// Config is the parsed config.json.
	Config *checkpoint.Config
	// Params is the number of parameters the layout uses (tied head once).
	Params int64
	// Files are the weight files and their sizes in bytes.
	Files []File
	// SHA256 identifies the weights (see checkpoint.Weights.SHA256).
	SHA256 string
	// DTypes counts tensors and bytes per stored dtype.
	DTypes map[checkpoint.DType]Count
	// Tokenizer describes the tokenizer, or is empty when there is none.
	Tokenizer string
	// TokenizerSHA256 identifies the tokenizer, when there is one.
	TokenizerSHA256 string
	// Groups lists tensors by layer: "layer 0" … and "other".
	Groups []Group
	// NonFinite lists tensors holding NaN or ±Inf values.
	NonFinite []NonFinite
}

// A File is one weight file.
type File struct {
	Name  string
	Bytes int64
}

// A Count is a number of tensors and their total bytes.
type Count struct {
	Tensors int
	Bytes   int64
}

// A Group is the tensors of one layer (or the rest).
type Group struct {
	Name    string
	Tensors []Tensor
}

// A Tensor is one tensor's name (within its group), dtype and shape.
type Tensor struct {
	Name  string
	DType checkpoint.DType
	Shape []int
}

// A NonFinite records a tensor with NaN or infinite values.
type NonFinite struct {
	File, Tensor string
	Count, First int
}

// Inspect loads the checkpoint (checking it fully, as a run would) and
// describes it. Every weight is scanned for NaN and Inf.
func Inspect(dir string) (*Report, error) {
	m, err := engine.Load(dir, engine.Options{Threads: 1})
	if err != nil {
		return nil, err
	}
	defer m.Close()
	w := m.Weights()
	r := &Report{Dir: dir, Config: m.Config, Params: m.Config.Params(), DTypes: map[checkpoint.DType]Count{}}
	if r.SHA256, err = w.SHA256(); err != nil {
		return nil, err
	}
	layerRE := regexp.MustCompile(`(?:^|\.)(?:layers|h)\.(\d+)\.`)
	sizes := map[string]int64{}
	groups := map[int][]Tensor{}
	var other []Tensor
	for _, name := range w.Names() {
		t, _ := w.Lookup(name)
		nb := int64(len(t.Bytes()))
		c := r.DTypes[t.DType]
		c.Tensors++
		c.Bytes += nb
		r.DTypes[t.DType] = c
		sizes[t.File] += nb
		if n, first := t.NonFinite(); n > 0 {
			r.NonFinite = append(r.NonFinite, NonFinite{File: t.File, Tensor: name, Count: n, First: first})
		}
		if loc := layerRE.FindStringSubmatchIndex(name); loc != nil {
			li, _ := strconv.Atoi(name[loc[2]:loc[3]])
			groups[li] = append(groups[li], Tensor{Name: name[loc[1]:], DType: t.DType, Shape: t.Shape})
		} else {
			other = append(other, Tensor{Name: name, DType: t.DType, Shape: t.Shape})
		}
	}
	for _, f := range w.Files() {
		r.Files = append(r.Files, File{Name: filepath.Base(f), Bytes: sizes[f]})
	}
	idx := make([]int, 0, len(groups))
	for i := range groups {
		idx = append(idx, i)
	}
	sort.Ints(idx)
	for _, i := range idx {
		r.Groups = append(r.Groups, Group{Name: fmt.Sprintf("layer %d", i), Tensors: groups[i]})
	}
	if len(other) > 0 {
		r.Groups = append(r.Groups, Group{Name: "other", Tensors: other})
	}
	if m.Tokenizer != nil {
		r.Tokenizer = m.Tokenizer.Describe()
		r.TokenizerSHA256 = m.Tokenizer.SHA256()
	}
	return r, nil
}

// familyNote says in a few words how the family's blocks are built.
func familyNote(f checkpoint.Family) string {
	switch f {
	case checkpoint.OPT:
		return "pre-LayerNorm, learned positions (offset 2), biases"
	case checkpoint.GPT2:
		return "pre-LayerNorm, learned positions, fused QKV (Conv1D layout)"
	case checkpoint.Llama:
		return "RMSNorm, rotary positions, SwiGLU MLP, grouped-query attention"
	}
	return ""
}

// WriteText prints the report for a person. Layers whose tensors have the same
// names, dtypes and shapes as the previous layer are folded into one line.
func (r *Report) WriteText(w io.Writer) error {
	c := r.Config
	p := &printer{w: w}
	p.f("checkpoint   %s\n", r.Dir)
	p.f("family       %s (%s)\n", c.Family, familyNote(c.Family))
	p.f("parameters   %s\n", thousands(r.Params))
	head := "untied head"
	if c.TiedHead {
		head = "head tied to the token embedding"
	}
	p.f("layers       %d; width %d; %d heads × %d (%d key/value heads); MLP %d (%s); %s\n",
		c.Layers, c.Hidden, c.Heads, c.HeadDim, c.KVHeads, c.FFN, c.Activation, head)
	p.f("vocabulary   %d; max positions %d\n", c.VocabSize, c.MaxPositions)
	var dts []string
	for dt, n := range r.DTypes {
		dts = append(dts, fmt.Sprintf("%s: %d tensors, %s", dt, n.Tensors, bytesText(n.Bytes)))
	}
	sort.Strings(dts)
	p.f("dtypes       %s\n", strings.Join(dts, "; "))
	for _, f := range r.Files {
		p.f("weights      %s (%s)\n", f.Name, bytesText(f.Bytes))
	}
	p.f("sha256       %s\n", r.SHA256)
	if r.Tokenizer == "" {
		p.f("tokenizer    none (no tokenizer.json or vocab.json + merges.txt)\n")
	} else {
		p.f("tokenizer    %s\n", r.Tokenizer)
		p.f("              sha256 %s\n", r.TokenizerSHA256)
	}
	p.f("\ntensors by layer:\n")
	for i := 0; i < len(r.Groups); i++ {
		g := r.Groups[i]
		j := i
		for j+1 < len(r.Groups) && g.Name != "other" && r.Groups[j+1].Name != "other" && sameTensors(g, r.Groups[j+1]) {
			j++
		}
		name := g.Name
		if j > i {
			name = fmt.Sprintf("layers %s–%s", strings.TrimPrefix(g.Name, "layer "), strings.TrimPrefix(r.Groups[j].Name, "layer "))
		}
		p.f("  %s\n", name)
		for _, t := range g.Tensors {
			p.f("    %-40s %-5s %v\n", t.Name, t.DType, t.Shape)
		}
		i = j
	}
	if len(r.NonFinite) == 0 {
		p.f("\nnon-finite   none\n")
	} else {
		p.f("\nnon-finite   %d tensors hold NaN or Inf:\n", len(r.NonFinite))
		for _, n := range r.NonFinite {
			p.f("  %s: tensor %q: %d values, first at element %d\n", n.File, n.Tensor, n.Count, n.First)
		}
	}
	return p.err
}

func sameTensors(a, b Group) bool {
	if len(a.Tensors) != len(b.Tensors) {
		return false
	}
	for i := range a.Tensors {
		x, y := a.Tensors[i], b.Tensors[i]
		if x.Name != y.Name || x.DType != y.DType || !slices.Equal(x.Shape, y.Shape) {
			return false
		}
	}
	return true
}

type printer struct {
	w   io.Writer
	err error
}

func (p *printer) f(format string, args ...any) {
	if p.err == nil {
		_, p.err = fmt.Fprintf(p.w, format, args...)
	}
}

func thousands(n int64) string {
	s := strconv.FormatInt(n, 10)
	var b strings.Builder
	for i, ch := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(ch)
	}
	return b.String()
}

func bytesText(n int64) string {
	switch {
	case n >= 1<<30:
		return fmt.Sprintf("%.2f GiB", float64(n)/(1<<30))
	case n >= 1<<20:
		return fmt.Sprintf("%.1f MiB", float64(n)/(1<<20))
	case n >= 1<<10:
		return fmt.Sprintf("%.1f KiB", float64(n)/(1<<10))
	}
	return fmt.Sprintf("%d B", n)
}
