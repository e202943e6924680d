package engine

// A Hook restricts, per token and per layer, which attention heads and which
// MLP neurons run. Returning nil keeps every unit, and gives results bit for
// bit equal to running with no hook. Returned indices must be ascending,
// unique and in range; the engine may keep the slice only until the call
// returns for the next token. Calls arrive in a fixed order (layer by layer,
// then row by row within a batch), from one goroutine at a time.
type Hook interface {
	// Heads returns the query heads to run for this token, or nil for all.
	Heads(t *Token) []int32
	// Neurons returns the MLP neurons to run for this token, or nil for all.
	Neurons(t *Token) []int32
}

// A Token is what a Hook sees of one token at one layer component. Slices are
// views into the engine's buffers, valid only during the call; do not modify.
type Token struct {
	// Layer is the decoder block, from 0.
	Layer int
	// Seq is the index of the sequence in the batch being run.
	Seq int
	// Pos is the token's position in its sequence, from 0.
	Pos int
	// LayerInput is the residual stream entering this layer.
	LayerInput []float32
	// PrevLayerInput is the residual stream entering the previous layer, nil at
	// layer 0 (for predictors that look one layer ahead).
	PrevLayerInput []float32
	// Input is the component's input after its norm: the attention input in
	// Heads, the MLP input in Neurons.
	Input []float32

	dense func() []float32
	cache []float32
}

// Dense returns what the dense component would produce for this token: in
// Neurons, every neuron's post-activation value (for the llama family, the
// gated product); in Heads, the L2 norm of each head's attention output. It is
// computed on first call, so only oracle selections pay for it.
func (t *Token) Dense() []float32 {
	if t.cache == nil && t.dense != nil {
		t.cache = t.dense()
	}
	return t.cache
}

// A BatchHook is a Hook that can also choose the MLP neurons of a whole
// batch of tokens at once (a predictor scored with one matrix product for
// every row instead of one per token). For batches of more than one row the
// engine calls NeuronsBatch instead of Neurons; its results must equal what
// Neurons would return token by token, in the same order (which keeps any
// statistics the hook gathers identical too).
type BatchHook interface {
	Hook
	// NeuronsBatch returns, for each token of one layer, what Neurons would
	// return; the slices stay valid until the next call.
	NeuronsBatch(tokens []*Token) [][]int32
}
