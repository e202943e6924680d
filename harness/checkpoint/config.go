package checkpoint

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"sort"
	"sparsegate/harness/atomicfile"
	"sparsegate/harness/jsonpos"
	"strings"
)

// A Family is one of the decoder-only architectures the engine runs.
type Family string

// The supported families. The string is the config.json "model_type" that selects it.
const (
	// OPT is the OPT layout: pre-LayerNorm, learned positions with an offset of 2,
	// ReLU MLP, biases everywhere, head tied to the token embedding.
	OPT Family = "opt"
	// GPT2 is the GPT-2 layout: pre-LayerNorm, learned positions, fused QKV
	// projection stored transposed (Conv1D), tanh-approximated GELU, tied head.
	GPT2 Family = "gpt2"
	// Llama is the Llama layout: RMSNorm, rotary positions, SwiGLU MLP,
	// grouped-query attention, no biases, untied head unless the config ties it.
	Llama Family = "llama"
)

// Families lists the supported families in a fixed order, for messages.
func Families() []Family { return []Family{OPT, GPT2, Llama} }

// A Config is the architecture of a checkpoint, read from its config.json and
// normalised across families. Fields that a family does not use are zero.
type Config struct {
	// Family selects the layout and the forward-pass variant.
	Family Family
	// VocabSize is the number of rows of the token embedding.
	VocabSize int
	// Hidden is the model width d.
	Hidden int
	// Layers is the number of decoder blocks.
	Layers int
	// Heads is the number of query heads.
	Heads int
	// KVHeads is the number of key/value heads (== Heads except for grouped-query attention).
	KVHeads int
	// HeadDim is the width of one head.
	HeadDim int
	// FFN is the width of the MLP's hidden layer (the neurons that sparsity selects).
	FFN int
	// MaxPositions is the longest sequence the position scheme supports.
	MaxPositions int
	// PositionOffset is added to a position before the learned-position lookup (OPT: 2).
	PositionOffset int
	// NormEps is the epsilon of LayerNorm or RMSNorm.
	NormEps float64
	// RopeTheta is the rotary base (Llama only).
	RopeTheta float64
	// Activation names the MLP nonlinearity: "relu", "gelu", "gelu_new" or "silu".
	Activation string
	// TiedHead is true when the output head reuses the token embedding.
	TiedHead bool
	// BOS, EOS and PAD are the special token ids from config.json, -1 when absent.
	BOS, EOS, PAD int
}

// The raw layouts of config.json, one superset struct; pointer fields tell
// "absent" from zero.
type rawConfig struct {
	ModelType     string   `json:"model_type"`
	Architectures []string `json:"architectures"`
	VocabSize     *int     `json:"vocab_size"`
	BOS           *int     `json:"bos_token_id"`
	EOS           *intList `json:"eos_token_id"`
	PAD           *int     `json:"pad_token_id"`
	TieEmbeddings *bool    `json:"tie_word_embeddings"`

	// OPT and Llama.
	HiddenSize       *int     `json:"hidden_size"`
	NumLayers        *int     `json:"num_hidden_layers"`
	NumHeads         *int     `json:"num_attention_heads"`
	MaxPositions     *int     `json:"max_position_embeddings"`
	FFNDim           *int     `json:"ffn_dim"`
	DoLayerNormFirst *bool    `json:"do_layer_norm_before"`
	WordEmbedProj    *int     `json:"word_embed_proj_dim"`
	EnableBias       *bool    `json:"enable_bias"`
	LNAffine         *bool    `json:"layer_norm_elementwise_affine"`
	ActivationFunc   *string  `json:"activation_function"`
	Intermediate     *int     `json:"intermediate_size"`
	NumKVHeads       *int     `json:"num_key_value_heads"`
	HeadDim          *int     `json:"head_dim"`
	RMSNormEps       *float64 `json:"rms_norm_eps"`
	RopeTheta        *float64 `json:"rope_theta"`
	RopeScaling      any      `json:"rope_scaling"`
	HiddenAct        *string  `json:"hidden_act"`
	AttentionBias    *bool    `json:"attention_bias"`
	MLPBias          *bool    `json:"mlp_bias"`

	// GPT-2.
	NEmbd   *int     `json:"n_embd"`
	NLayer  *int     `json:"n_layer"`
	NHead   *int     `json:"n_head"`
	NPos    *int     `json:"n_positions"`
	NInner  *int     `json:"n_inner"`
	LNEps   *float64 `json:"layer_norm_epsilon"`
	ScaleAW *bool    `json:"scale_attn_weights"`
	InvIdx  *bool    `json:"scale_attn_by_inverse_layer_idx"`
}

// intList accepts an int or a list of ints (some configs list several EOS ids).
type intList []int

func (l *intList) UnmarshalJSON(b []byte) error {
	var one int
	if err := json.Unmarshal(b, &one); err == nil {
		*l = intList{one}
		return nil
	}
	var many []int
	if err := json.Unmarshal(b, &many); err != nil {
		return fmt.Errorf(`field "eos_token_id": want an integer or a list of integers, got %s`, bytes.TrimSpace(b))
	}
	*l = many
	return nil
}

// LoadConfig reads and validates a config.json. Every error names the file and
// the field, and says what is supported.
func LoadConfig(path string) (*Config, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("reading model config: %w", err)
	}
	c, err := ParseConfig(b)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return c, nil
}

// ParseConfig parses the bytes of a config.json; errors carry no file name.
func ParseConfig(b []byte) (*Config, error) {
	if t := bytes.TrimLeft(b, " \t\r\n"); len(t) > 0 && t[0] != '{' {
		return nil, errors.New("config.json must hold a JSON object ({...}) of model settings")
	}
	if key, off, dup := jsonpos.DuplicateKey(b); dup {
		line, col := jsonpos.LineCol(b, off)
		return nil, fmt.Errorf("%d:%d: field %q appears twice; JSON keeps only the last, so delete the one that is wrong", line, col, key)
	}
	var r rawConfig
	if err := json.Unmarshal(b, &r); err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) {
			line, col := jsonpos.OfSyntaxError(b, se)
			return nil, fmt.Errorf("%d:%d: invalid JSON: %v", line, col, err)
		}
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) {
			return nil, fmt.Errorf("field %q: wrong type: want %s, got JSON %s", te.Field, te.Type, te.Value)
		}
		return nil, err
	}
	c := &Config{BOS: -1, EOS: -1, PAD: -1}
	if r.BOS != nil {
		c.BOS = *r.BOS
	}
	if r.EOS != nil && len(*r.EOS) > 0 {
		c.EOS = (*r.EOS)[0]
		if r.VocabSize != nil {
			for _, id := range *r.EOS {
				if id < 0 || id >= *r.VocabSize {
					return nil, fmt.Errorf("eos_token_id %d is outside the vocabulary of %d tokens", id, *r.VocabSize)
				}
			}
		}
	}
	if r.PAD != nil {
		c.PAD = *r.PAD
	}
	var err error
	switch Family(r.ModelType) {
	case OPT:
		err = c.fromOPT(&r)
	case GPT2:
		err = c.fromGPT2(&r)
	case Llama:
		err = c.fromLlama(&r)
	case "":
		return nil, fmt.Errorf(`field "model_type" is missing; supported: %s`, familyList())
	default:
		return nil, fmt.Errorf(`field "model_type": unsupported architecture %q; supported: %s`, r.ModelType, familyList())
	}
	if err != nil {
		return nil, err
	}
	if err := c.Validate(); err != nil {
		return nil, err
	}
	return c, nil
}

func familyList() string {
	fams := Families()
	names := make([]string, len(fams))
	for i, f := range fams {
		names[i] = string(f)
	}
	return strings.Join(names, ", ")
}

// required is one integer field that config.json must have.
type required struct {
	dst   *int
	src   *int
	field string
}

// needAll copies required integer fields, or reports the first one missing.
func needAll(fields ...required) error {
	for _, f := range fields {
		if f.src == nil {
			return fmt.Errorf("field %q is missing", f.field)
		}
		*f.dst = *f.src
	}
	return nil
}

func (c *Config) fromOPT(r *rawConfig) error {
	c.Family = OPT
	if err := needAll(
		required{&c.VocabSize, r.VocabSize, "vocab_size"},
		required{&c.Hidden, r.HiddenSize, "hidden_size"},
		required{&c.Layers, r.NumLayers, "num_hidden_layers"},
		required{&c.Heads, r.NumHeads, "num_attention_heads"},
		required{&c.FFN, r.FFNDim, "ffn_dim"},
		required{&c.MaxPositions, r.MaxPositions, "max_position_embeddings"},
	); err != nil {
		return err
	}
	if r.DoLayerNormFirst != nil && !*r.DoLayerNormFirst {
		return errors.New(`field "do_layer_norm_before": false (post-LayerNorm OPT) is not supported; only pre-LayerNorm OPT checkpoints run`)
	}
	if r.WordEmbedProj != nil && *r.WordEmbedProj != c.Hidden {
		return fmt.Errorf(`field "word_embed_proj_dim": %d differs from hidden_size %d; projected embeddings are not supported`, *r.WordEmbedProj, c.Hidden)
	}
	if r.EnableBias != nil && !*r.EnableBias {
		return errors.New(`field "enable_bias": false is not supported for OPT`)
	}
	if r.LNAffine != nil && !*r.LNAffine {
		return errors.New(`field "layer_norm_elementwise_affine": false is not supported for OPT`)
	}
	c.Activation = "relu"
	if r.ActivationFunc != nil {
		c.Activation = *r.ActivationFunc
	}
	c.KVHeads = c.Heads
	if c.Heads > 0 {
		c.HeadDim = c.Hidden / c.Heads
	}
	c.PositionOffset = 2
	c.NormEps = 1e-5
	c.TiedHead = r.TieEmbeddings == nil || *r.TieEmbeddings
	return nil
}

func (c *Config) fromGPT2(r *rawConfig) error {
	c.Family = GPT2
	if err := needAll(
		required{&c.VocabSize, r.VocabSize, "vocab_size"},
		required{&c.Hidden, r.NEmbd, "n_embd"},
		required{&c.Layers, r.NLayer, "n_layer"},
		required{&c.Heads, r.NHead, "n_head"},
		required{&c.MaxPositions, r.NPos, "n_positions"},
	); err != nil {
		return err
	}
	c.FFN = 4 * c.Hidden
	if r.NInner != nil {
		c.FFN = *r.NInner
	}
	c.Activation = "gelu_new"
	if r.ActivationFunc != nil {
		c.Activation = *r.ActivationFunc
	}
	if r.ScaleAW != nil && !*r.ScaleAW {
		return errors.New(`field "scale_attn_weights": false is not supported`)
	}
	if r.InvIdx != nil && *r.InvIdx {
		return errors.New(`field "scale_attn_by_inverse_layer_idx": true is not supported; only the standard 1/sqrt(head size) scaling runs`)
	}
	c.KVHeads = c.Heads
	if c.Heads > 0 {
		c.HeadDim = c.Hidden / c.Heads
	}
	c.NormEps = 1e-5
	if r.LNEps != nil {
		c.NormEps = *r.LNEps
	}
	c.TiedHead = r.TieEmbeddings == nil || *r.TieEmbeddings
	return nil
}

func (c *Config) fromLlama(r *rawConfig) error {
	c.Family = Llama
	if err := needAll(
		required{&c.VocabSize, r.VocabSize, "vocab_size"},
		required{&c.Hidden, r.HiddenSize, "hidden_size"},
		required{&c.Layers, r.NumLayers, "num_hidden_layers"},
		required{&c.Heads, r.NumHeads, "num_attention_heads"},
		required{&c.FFN, r.Intermediate, "intermediate_size"},
		required{&c.MaxPositions, r.MaxPositions, "max_position_embeddings"},
	); err != nil {
		return err
	}
	c.KVHeads = c.Heads
	if r.NumKVHeads != nil {
		c.KVHeads = *r.NumKVHeads
	}
	if c.Heads > 0 {
		c.HeadDim = c.Hidden / c.Heads
	}
	if r.HeadDim != nil {
		c.HeadDim = *r.HeadDim
	} else if c.Heads > 0 && c.Hidden%c.Heads != 0 {
		return fmt.Errorf("hidden size (hidden_size) %d is not divisible by the head count (num_attention_heads) %d; give head_dim explicitly", c.Hidden, c.Heads)
	}
	c.NormEps = 1e-6
	if r.RMSNormEps != nil {
		c.NormEps = *r.RMSNormEps
	}
	c.RopeTheta = 10000
	if r.RopeTheta != nil {
		c.RopeTheta = *r.RopeTheta
	}
	if r.RopeScaling != nil {
		return errors.New(`field "rope_scaling": scaled rotary positions are not supported; use a checkpoint with "rope_scaling": null`)
	}
	c.Activation = "silu"
	if r.HiddenAct != nil {
		c.Activation = *r.HiddenAct
	}
	if r.AttentionBias != nil && *r.AttentionBias {
		return errors.New(`field "attention_bias": true is not supported for the llama family`)
	}
	if r.MLPBias != nil && *r.MLPBias {
		return errors.New(`field "mlp_bias": true is not supported for the llama family`)
	}
	c.TiedHead = r.TieEmbeddings != nil && *r.TieEmbeddings
	return nil
}

// jsonKey names the config.json field that holds a quantity in the family's
// layout, for messages.
func jsonKey(f Family, q string) string {
	keys := map[string][3]string{ // opt, gpt2, llama
		"vocab":     {"vocab_size", "vocab_size", "vocab_size"},
		"hidden":    {"hidden_size", "n_embd", "hidden_size"},
		"layers":    {"num_hidden_layers", "n_layer", "num_hidden_layers"},
		"heads":     {"num_attention_heads", "n_head", "num_attention_heads"},
		"kvheads":   {"num_attention_heads", "n_head", "num_key_value_heads"},
		"headdim":   {"hidden_size / num_attention_heads", "n_embd / n_head", "head_dim"},
		"ffn":       {"ffn_dim", "n_inner", "intermediate_size"},
		"positions": {"max_position_embeddings", "n_positions", "max_position_embeddings"},
		"eps":       {"layer norm epsilon", "layer_norm_epsilon", "rms_norm_eps"},
		"act":       {"activation_function", "activation_function", "hidden_act"},
	}[q]
	switch f {
	case OPT:
		return keys[0]
	case GPT2:
		return keys[1]
	}
	return keys[2]
}

// Validate checks that the sizes are positive and consistent with each other.
// Messages name the config.json field of the family's layout in parentheses.
func (c *Config) Validate() error {
	k := func(q string) string { return jsonKey(c.Family, q) }
	pos := []struct {
		v    int
		name string
		key  string
	}{
		{c.VocabSize, "vocabulary size", "vocab"}, {c.Hidden, "hidden size", "hidden"}, {c.Layers, "layer count", "layers"},
		{c.Heads, "head count", "heads"}, {c.KVHeads, "key/value head count", "kvheads"}, {c.HeadDim, "head size", "headdim"},
		{c.FFN, "MLP width", "ffn"}, {c.MaxPositions, "maximum positions", "positions"},
	}
	for _, p := range pos {
		if p.v <= 0 {
			return fmt.Errorf("%s (%s) is %d; it must be positive", p.name, k(p.key), p.v)
		}
	}
	if c.Family != Llama && c.Heads*c.HeadDim != c.Hidden {
		return fmt.Errorf("hidden size (%s) %d is not divisible by the head count (%s) %d", k("hidden"), c.Hidden, k("heads"), c.Heads)
	}
	if c.Heads%c.KVHeads != 0 {
		return fmt.Errorf("head count (%s) %d is not a multiple of the key/value head count (%s) %d", k("heads"), c.Heads, k("kvheads"), c.KVHeads)
	}
	if c.Family == Llama && c.HeadDim%2 != 0 {
		return fmt.Errorf("head size (%s) %d is odd; rotary positions need an even head size", k("headdim"), c.HeadDim)
	}
	var want []string
	switch c.Family {
	case OPT:
		want = []string{"relu", "gelu", "gelu_new", "silu"}
	case GPT2:
		want = []string{"gelu_new", "gelu", "relu", "silu"}
	case Llama:
		want = []string{"silu"}
	}
	ok := false
	for _, a := range want {
		ok = ok || a == c.Activation
	}
	if !ok {
		return fmt.Errorf("activation (%s) %q is not supported for the %s family; supported: %s", k("act"), c.Activation, c.Family, strings.Join(want, ", "))
	}
	if !(c.NormEps > 0) {
		return fmt.Errorf("norm epsilon (%s) %g must be positive", k("eps"), c.NormEps)
	}
	if c.Family == Llama && !(c.RopeTheta > 0) {
		return fmt.Errorf("rope_theta %g must be positive", c.RopeTheta)
	}
	for _, id := range []struct {
		v    int
		name string
	}{{c.BOS, "bos_token_id"}, {c.EOS, "eos_token_id"}, {c.PAD, "pad_token_id"}} {
		if id.v >= c.VocabSize || id.v < -1 {
			return fmt.Errorf("%s %d is outside the vocabulary of %d tokens", id.name, id.v, c.VocabSize)
		}
	}
	return nil
}

// MarshalJSON writes the config in its family's native config.json layout, so
// that other tools read the checkpoints the project writes.
func (c *Config) MarshalJSON() ([]byte, error) {
	m := map[string]any{"model_type": string(c.Family), "vocab_size": c.VocabSize}
	ids := func() {
		for _, id := range []struct {
			v    int
			name string
		}{{c.BOS, "bos_token_id"}, {c.EOS, "eos_token_id"}, {c.PAD, "pad_token_id"}} {
			if id.v >= 0 {
				m[id.name] = id.v
			}
		}
	}
	ids()
	m["tie_word_embeddings"] = c.TiedHead
	switch c.Family {
	case OPT:
		m["architectures"] = []string{"OPTForCausalLM"}
		m["hidden_size"], m["num_hidden_layers"], m["num_attention_heads"] = c.Hidden, c.Layers, c.Heads
		m["ffn_dim"], m["max_position_embeddings"] = c.FFN, c.MaxPositions
		m["word_embed_proj_dim"], m["do_layer_norm_before"] = c.Hidden, true
		m["activation_function"], m["enable_bias"] = c.Activation, true
	case GPT2:
		m["architectures"] = []string{"GPT2LMHeadModel"}
		m["n_embd"], m["n_layer"], m["n_head"], m["n_positions"] = c.Hidden, c.Layers, c.Heads, c.MaxPositions
		m["n_inner"], m["layer_norm_epsilon"], m["activation_function"] = c.FFN, c.NormEps, c.Activation
	case Llama:
		m["architectures"] = []string{"LlamaForCausalLM"}
		m["hidden_size"], m["num_hidden_layers"], m["num_attention_heads"] = c.Hidden, c.Layers, c.Heads
		m["num_key_value_heads"], m["head_dim"], m["intermediate_size"] = c.KVHeads, c.HeadDim, c.FFN
		m["max_position_embeddings"], m["rms_norm_eps"], m["rope_theta"] = c.MaxPositions, c.NormEps, c.RopeTheta
		m["hidden_act"], m["rope_scaling"] = c.Activation, nil
		m["attention_bias"], m["mlp_bias"] = false, false
	default:
		return nil, fmt.Errorf("cannot write a config for family %q", c.Family)
	}
	return json.MarshalIndent(m, "", "  ")
}

// WriteConfig writes cfg as DIR/config.json atomically.
func WriteConfig(dir string, cfg *Config) error {
	b, err := cfg.MarshalJSON()
	if err != nil {
		return err
	}
	return atomicfile.WriteFile(filepath.Join(dir, "config.json"), append(b, '\n'))
}

// Params returns the parameter count implied by the config (tied heads counted once).
func (c *Config) Params() int64 {
	var n int64
	for _, s := range c.TensorSpecs() {
		p := int64(1)
		for _, d := range s.Shape {
			p *= int64(d)
		}
		n += p
	}
	return n
}

// A TensorSpec is one tensor that a family's layout requires, with its shape.
type TensorSpec struct {
	Name  string
	Shape []int
}

// TensorSpecs lists every tensor the family's layout requires, with the names
// open checkpoints use (OPT under "model.decoder.", GPT-2 bare, Llama under "model."),
// sorted by name.
func (c *Config) TensorSpecs() []TensorSpec {
	d, f, v := c.Hidden, c.FFN, c.VocabSize
	var s []TensorSpec
	add := func(name string, shape ...int) { s = append(s, TensorSpec{name, shape}) }
	switch c.Family {
	case OPT:
		p := "model.decoder."
		add(p+"embed_tokens.weight", v, d)
		add(p+"embed_positions.weight", c.MaxPositions+c.PositionOffset, d)
		for i := 0; i < c.Layers; i++ {
			l := fmt.Sprintf("%slayers.%d.", p, i)
			for _, n := range []string{"self_attn_layer_norm", "final_layer_norm"} {
				add(l+n+".weight", d)
				add(l+n+".bias", d)
			}
			for _, n := range []string{"q_proj", "k_proj", "v_proj", "out_proj"} {
				add(l+"self_attn."+n+".weight", d, d)
				add(l+"self_attn."+n+".bias", d)
			}
			add(l+"fc1.weight", f, d)
			add(l+"fc1.bias", f)
			add(l+"fc2.weight", d, f)
			add(l+"fc2.bias", d)
		}
		add(p+"final_layer_norm.weight", d)
		add(p+"final_layer_norm.bias", d)
	case GPT2:
		add("wte.weight", v, d)
		add("wpe.weight", c.MaxPositions, d)
		for i := 0; i < c.Layers; i++ {
			l := fmt.Sprintf("h.%d.", i)
			for _, n := range []string{"ln_1", "ln_2"} {
				add(l+n+".weight", d)
				add(l+n+".bias", d)
			}
			add(l+"attn.c_attn.weight", d, 3*d)
			add(l+"attn.c_attn.bias", 3*d)
			add(l+"attn.c_proj.weight", d, d)
			add(l+"attn.c_proj.bias", d)
			add(l+"mlp.c_fc.weight", d, f)
			add(l+"mlp.c_fc.bias", f)
			add(l+"mlp.c_proj.weight", f, d)
			add(l+"mlp.c_proj.bias", d)
		}
		add("ln_f.weight", d)
		add("ln_f.bias", d)
	case Llama:
		q, kv := c.Heads*c.HeadDim, c.KVHeads*c.HeadDim
		add("model.embed_tokens.weight", v, d)
		for i := 0; i < c.Layers; i++ {
			l := fmt.Sprintf("model.layers.%d.", i)
			add(l+"input_layernorm.weight", d)
			add(l+"post_attention_layernorm.weight", d)
			add(l+"self_attn.q_proj.weight", q, d)
			add(l+"self_attn.k_proj.weight", kv, d)
			add(l+"self_attn.v_proj.weight", kv, d)
			add(l+"self_attn.o_proj.weight", d, q)
			add(l+"mlp.gate_proj.weight", f, d)
			add(l+"mlp.up_proj.weight", f, d)
			add(l+"mlp.down_proj.weight", d, f)
		}
		add("model.norm.weight", d)
	}
	if !c.TiedHead {
		add("lm_head.weight", v, d)
	}
	sort.Slice(s, func(i, j int) bool { return s[i].Name < s[j].Name })
	return s
}
