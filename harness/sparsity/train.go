package sparsity

import (
	"cmp"
	"fmt"
	"math"
	"math/bits"
	"math/rand/v2"
	"runtime"
	"slices"

	"sparsegate/harness/kernels"
)

// TrainOptions configure TrainPredictor; zero values take documented defaults.
type TrainOptions struct {
	Rank          int     // hidden width r of the predictor (default 64)
	Epochs        int     // maximum passes over the training rows (default 20)
	BatchSize     int     // mini-batch rows (default 64)
	LR            float64 // Adam learning rate (default 1e-3); Adam β1 0.9, β2 0.999, ε 1e-8
	WeightDecay   float64 // decoupled (AdamW) weight decay on W1 and W2 (default 0)
	PosWeight     float64 // weight of the positive class in the binary cross-entropy; 0 = automatic: (#negatives / #positives) over the training labels, capped at 50
	ValidFraction float64 // rows held out for validation and early stopping (default 0.1; the split is a seeded shuffle)
	Patience      int     // epochs without a better validation recall before stopping (default 3)
	K             int     // the budget: validation recall is measured for the top-K scores (required, 1..Out)
	Seed          uint64  // fixes the initialisation, the split and the batch order
	// Progress, when set, is called after every epoch (epoch counts from 1).
	Progress func(epoch, epochs int, validRecall float64)
}

// A TrainReport says how training went.
type TrainReport struct {
	Rows, TrainRows, ValidRows int
	PositiveRate               float64     // mean fraction of active units per row, over all rows
	PosWeight                  float64     // the positive-class weight used (given, or the automatic value)
	Epochs                     int         // epochs run
	BestEpoch                  int         // the epoch (from 1) whose weights were returned
	ValidRecall                float64     // at BestEpoch: mean over validation rows of |topK(scores) ∩ active| / |active| (rows with no active unit are skipped)
	ValidLoss                  float64     // at BestEpoch: mean weighted cross-entropy per validation label
	History                    []EpochStat // per epoch: train loss, valid loss, valid recall
}

// An EpochStat records one epoch: the mean weighted cross-entropy per label
// over the training rows (accumulated during the epoch) and over the
// validation rows (after it), and the validation recall at K.
type EpochStat struct{ TrainLoss, ValidLoss, ValidRecall float64 }

// Defaults and fixed constants of the optimiser. The Adam/AdamW update and
// its β1, β2, ε values are common practice, no source (from memory).
const (
	defaultRank      = 64
	defaultEpochs    = 20
	defaultBatch     = 64
	defaultLR        = 1e-3
	defaultValid     = 0.1
	defaultPatience  = 3
	maxAutoPosWeight = 50
	adamBeta1        = 0.9
	adamBeta2        = 0.999
	adamEps          = 1e-8
	evalChunk        = 256 // rows per forward pass when scoring held-out rows
)

// Independent random streams drawn from one Seed.
const (
	streamInit  = 0x696e6974 // weight initialisation
	streamSplit = 0x73706c74 // train/validation split
	streamOrder = 0x6f726472 // mini-batch order
)

// TrainPredictor fits a predictor on n rows: x is n×in (row-major, the layer inputs),
// active is n×out (1 = the unit was active/among the kept set for that token).
// Class-weighted binary cross-entropy on the scores (as logits), mini-batch Adam,
// early stop on validation recall; returns the weights of the best epoch.
//
// W1 and W2 start uniform in ±1/sqrt(fan_in) (fan_in = in for W1, rank for
// W2), B1 at 0 and B2[j] at the logit of unit j's smoothed positive rate
// (count+0.5)/(rows+1) over the training rows. The result is bit-identical
// for the same inputs and options whatever GOMAXPROCS is: the matrix
// products are the kernels' deterministic GEMMs and every other reduction
// runs in one goroutine in a fixed order.
func TrainPredictor(x []float32, active []uint8, n, in, out int, opts TrainOptions) (*Predictor, *TrainReport, error) {
	if err := checkTrainData(x, active, n, in, out); err != nil {
		return nil, nil, fmt.Errorf("sparsity: train predictor: %w", err)
	}
	o, err := opts.withDefaults(out)
	if err != nil {
		return nil, nil, fmt.Errorf("sparsity: train predictor: %w", err)
	}
	nValid, err := splitSize(n, o.ValidFraction)
	if err != nil {
		return nil, nil, fmt.Errorf("sparsity: train predictor: %w", err)
	}
	order := permutation(n, rand.NewPCG(o.Seed, streamSplit))
	validIdx, trainIdx := order[:nValid], order[nValid:]
	slices.Sort(validIdx)
	slices.Sort(trainIdx)

	counts, trainPos := unitCounts(active, trainIdx, out)
	if trainPos == 0 {
		return nil, nil, fmt.Errorf("sparsity: train predictor: the %d training rows have no active unit; record activity on more tokens", len(trainIdx))
	}
	posW := o.PosWeight
	if posW == 0 {
		posW = autoPosWeight(len(trainIdx)*out-trainPos, trainPos)
	}
	validX, validY := gatherRows(x, active, validIdx, in, out)
	if !anyActive(validY) {
		return nil, nil, fmt.Errorf("sparsity: train predictor: the %d validation rows have no active unit; use more rows or a larger ValidFraction", nValid)
	}

	threads := runtime.GOMAXPROCS(0)
	p := initPredictor(in, o.Rank, out, counts, len(trainIdx), rand.NewPCG(o.Seed, streamInit))
	tr := newTrainer(p, o.BatchSize, threads)
	ev := newEvaluator(p, threads)
	orderRNG := rand.NewPCG(o.Seed, streamOrder)
	batchOrder := slices.Clone(trainIdx)

	rep := &TrainReport{Rows: n, TrainRows: len(trainIdx), ValidRows: nValid,
		PositiveRate: float64(countActive(active)) / float64(n*out), PosWeight: posW}
	var best *Predictor
	bestRecall := math.Inf(-1)
	for epoch := 1; epoch <= o.Epochs; epoch++ {
		shuffle(batchOrder, orderRNG)
		var lossSum float64
		for b0 := 0; b0 < len(batchOrder); b0 += o.BatchSize {
			rows := batchOrder[b0:min(b0+o.BatchSize, len(batchOrder))]
			tr.load(x, active, rows)
			loss := tr.gradient(len(rows), posW)
			lossSum += float64(loss * float64(len(rows)))
			tr.step(o.LR, o.WeightDecay)
		}
		trainLoss := lossSum / float64(len(batchOrder))
		if math.IsNaN(trainLoss) || math.IsInf(trainLoss, 0) {
			return nil, nil, fmt.Errorf("sparsity: train predictor: training diverged in epoch %d (train loss %v); lower LR (now %g)", epoch, trainLoss, o.LR)
		}
		validLoss, validRecall := ev.run(validX, validY, nValid, o.K, posW)
		rep.History = append(rep.History, EpochStat{TrainLoss: trainLoss, ValidLoss: validLoss, ValidRecall: validRecall})
		rep.Epochs = epoch
		if validRecall > bestRecall {
			bestRecall = validRecall
			best = p.clone()
			rep.BestEpoch, rep.ValidRecall, rep.ValidLoss = epoch, validRecall, validLoss
		}
		if o.Progress != nil {
			o.Progress(epoch, o.Epochs, validRecall)
		}
		if epoch-rep.BestEpoch >= o.Patience {
			break
		}
	}
	return best, rep, nil
}

// RecallAtK measures |topK ∩ active| / |active| averaged over rows (skipping rows with no active unit).
// x is n×p.In and active n×p.Out, row-major; the top k follow TopK (ties go
// to the lower index; a NaN score ranks below every number). It returns 0
// when no row has an active unit. Bad lengths or k outside 1..p.Out are
// programming errors and panic.
func RecallAtK(p *Predictor, x []float32, active []uint8, n, k int) float64 {
	if n < 0 || len(x) != n*p.In || len(active) != n*p.Out {
		panic("sparsity: RecallAtK lengths disagree with n and the predictor shape")
	}
	if k < 1 || k > p.Out {
		panic("sparsity: RecallAtK k out of range")
	}
	_, recall := newEvaluator(p, runtime.GOMAXPROCS(0)).run(x, active, n, k, 1)
	return recall
}

// withDefaults fills zero options and rejects values no default can fix.
func (o TrainOptions) withDefaults(out int) (TrainOptions, error) {
	for _, c := range []struct {
		name string
		v    int
	}{{"Rank", o.Rank}, {"Epochs", o.Epochs}, {"BatchSize", o.BatchSize}, {"Patience", o.Patience}} {
		if c.v < 0 {
			return o, fmt.Errorf("TrainOptions.%s = %d is negative; use 0 for the default or a positive value", c.name, c.v)
		}
	}
	for _, c := range []struct {
		name string
		v    float64
	}{{"LR", o.LR}, {"WeightDecay", o.WeightDecay}, {"PosWeight", o.PosWeight}} {
		if !(c.v >= 0) || math.IsInf(c.v, 0) {
			return o, fmt.Errorf("TrainOptions.%s = %v must be finite and ≥ 0 (0 = default)", c.name, c.v)
		}
	}
	if !(o.ValidFraction >= 0 && o.ValidFraction < 1) {
		return o, fmt.Errorf("TrainOptions.ValidFraction = %v must lie in [0, 1) (0 = default %g)", o.ValidFraction, defaultValid)
	}
	if o.K < 1 || o.K > out {
		return o, fmt.Errorf("TrainOptions.K = %d is out of range: the budget must be 1..%d (the unit count)", o.K, out)
	}
	o.Rank = cmp.Or(o.Rank, defaultRank)
	o.Epochs = cmp.Or(o.Epochs, defaultEpochs)
	o.BatchSize = cmp.Or(o.BatchSize, defaultBatch)
	o.Patience = cmp.Or(o.Patience, defaultPatience)
	o.LR = cmp.Or(o.LR, defaultLR)
	o.ValidFraction = cmp.Or(o.ValidFraction, defaultValid)
	return o, nil
}

// checkTrainData validates the shapes and values of the training rows.
func checkTrainData(x []float32, active []uint8, n, in, out int) error {
	if n < 1 || in < 1 || out < 1 {
		return fmt.Errorf("shape n=%d in=%d out=%d: all must be positive", n, in, out)
	}
	if len(x) != n*in {
		return fmt.Errorf("x holds %d values, want n·in = %d·%d = %d", len(x), n, in, n*in)
	}
	if len(active) != n*out {
		return fmt.Errorf("active holds %d values, want n·out = %d·%d = %d", len(active), n, out, n*out)
	}
	for i, v := range x {
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			return fmt.Errorf("x row %d column %d is %v; the layer inputs must be finite", i/in, i%in, v)
		}
	}
	for i, v := range active {
		if v > 1 {
			return fmt.Errorf("active row %d unit %d is %d; labels must be 0 or 1", i/out, i%out, v)
		}
	}
	return nil
}

// splitSize returns how many of n rows the validation fraction holds out,
// or an error naming the smallest n that leaves at least one row on each side.
func splitSize(n int, frac float64) (int, error) {
	nValid := int(float64(n) * frac)
	if nValid >= 1 && n-nValid >= 1 {
		return nValid, nil
	}
	need := max(2, int(math.Ceil(1/frac)))
	for int(float64(need)*frac) < 1 {
		need++
	}
	return 0, fmt.Errorf("%d rows are too few to hold out a validation fraction of %g: need at least %d rows", n, frac, need)
}

// autoPosWeight is the automatic positive-class weight: negatives/positives,
// capped at maxAutoPosWeight; 1 when there is no negative label (the
// ratio 0 would silence the positive class). pos must be positive.
func autoPosWeight(neg, pos int) float64 {
	if neg == 0 {
		return 1
	}
	return min(float64(neg)/float64(pos), maxAutoPosWeight)
}

// unitCounts counts, per unit, the active labels of the given rows.
func unitCounts(active []uint8, rows []int, out int) (counts []int, total int) {
	counts = make([]int, out)
	for _, r := range rows {
		for j, v := range active[r*out : (r+1)*out] {
			counts[j] += int(v)
		}
	}
	for _, c := range counts {
		total += c
	}
	return counts, total
}

func countActive(active []uint8) int {
	var c int
	for _, v := range active {
		c += int(v)
	}
	return c
}

func anyActive(active []uint8) bool { return slices.Contains(active, 1) }

// gatherRows copies the given rows of x and active into contiguous arrays.
func gatherRows(x []float32, active []uint8, rows []int, in, out int) ([]float32, []uint8) {
	gx := make([]float32, 0, len(rows)*in)
	gy := make([]uint8, 0, len(rows)*out)
	for _, r := range rows {
		gx = append(gx, x[r*in:(r+1)*in]...)
		gy = append(gy, active[r*out:(r+1)*out]...)
	}
	return gx, gy
}

// initPredictor draws the starting weights (see TrainPredictor).
func initPredictor(in, rank, out int, counts []int, rows int, r *rand.PCG) *Predictor {
	p := NewPredictor(in, rank, out)
	fillUniform(p.W1, 1/math.Sqrt(float64(in)), r)
	fillUniform(p.W2, 1/math.Sqrt(float64(rank)), r)
	for j, c := range counts {
		rate := (float64(c) + 0.5) / (float64(rows) + 1)
		p.B2[j] = float32(math.Log(rate / (1 - rate)))
	}
	return p
}

func (p *Predictor) clone() *Predictor {
	return &Predictor{In: p.In, Rank: p.Rank, Out: p.Out,
		W1: slices.Clone(p.W1), B1: slices.Clone(p.B1), W2: slices.Clone(p.W2), B2: slices.Clone(p.B2)}
}

// The random helpers below use only the PCG generator's raw 64-bit output
// (whose sequence is fixed), so the draws do not depend on how a library
// maps bits to ranges.

// fillUniform sets v[i] uniform in [-a, a).
func fillUniform(v []float32, a float64, r *rand.PCG) {
	for i := range v {
		u := float64(r.Uint64()>>11) * 0x1p-53
		v[i] = float32(a * (2*u - 1))
	}
}

// uintBelow returns a uniform integer in [0, n) for n > 0 (multiply-shift
// with rejection; common practice, no source).
func uintBelow(n uint64, r *rand.PCG) uint64 {
	thresh := -n % n
	for {
		hi, lo := bits.Mul64(r.Uint64(), n)
		if lo >= thresh {
			return hi
		}
	}
}

// shuffle permutes v in place (Fisher–Yates).
func shuffle(v []int, r *rand.PCG) {
	for i := len(v) - 1; i > 0; i-- {
		j := int(uintBelow(uint64(i+1), r))
		v[i], v[j] = v[j], v[i]
	}
}

func permutation(n int, r *rand.PCG) []int {
	v := make([]int, n)
	for i := range v {
		v[i] = i
	}
	shuffle(v, r)
	return v
}

// A trainer holds the scratch of one mini-batch step and the Adam state.
// Parameter blocks are indexed W1, B1, W2, B2.
type trainer struct {
	p             *Predictor
	threads       int
	t             int // Adam steps taken
	xb            []float32
	yb            []uint8
	h, a, da, dhT []float32 // batch×rank pre-activation, activation, its gradient; rank×batch
	s, dsT        []float32 // batch×out scores (then their gradient); out×batch
	acc           []float64 // column sums
	g             [4][]float32
	m, v          [4][]float64
}

func newTrainer(p *Predictor, batch, threads int) *trainer {
	t := &trainer{p: p, threads: threads,
		xb: make([]float32, batch*p.In), yb: make([]uint8, batch*p.Out),
		h: make([]float32, batch*p.Rank), a: make([]float32, batch*p.Rank),
		da: make([]float32, batch*p.Rank), dhT: make([]float32, batch*p.Rank),
		s: make([]float32, batch*p.Out), dsT: make([]float32, batch*p.Out),
		acc: make([]float64, max(p.Rank, p.Out))}
	for i, w := range t.params() {
		t.g[i] = make([]float32, len(w))
		t.m[i] = make([]float64, len(w))
		t.v[i] = make([]float64, len(w))
	}
	return t
}

func (t *trainer) params() [4][]float32 {
	return [4][]float32{t.p.W1, t.p.B1, t.p.W2, t.p.B2}
}

// load copies the given rows into the batch buffers.
func (t *trainer) load(x []float32, active []uint8, rows []int) {
	in, out := t.p.In, t.p.Out
	for i, r := range rows {
		copy(t.xb[i*in:(i+1)*in], x[r*in:(r+1)*in])
		copy(t.yb[i*out:(i+1)*out], active[r*out:(r+1)*out])
	}
}

// gradient runs the forward and backward pass over the first m loaded rows,
// leaves ∂L/∂θ in t.g and returns L, the mean weighted cross-entropy per label.
func (t *trainer) gradient(m int, posW float64) float64 {
	p := t.p
	in, rank, out := p.In, p.Rank, p.Out
	xb, yb := t.xb[:m*in], t.yb[:m*out]
	h, a, da, dhT := t.h[:m*rank], t.a[:m*rank], t.da[:m*rank], t.dhT[:m*rank]
	s, dsT := t.s[:m*out], t.dsT[:m*out]

	forward(p, h, a, s, xb, m, t.threads)
	loss := bceGrad(s, yb, posW, 1/float64(m*out)) // s now holds ∂L/∂s

	transpose(dsT, s, m, out)
	kernels.Gemm(t.g[2], dsT, a, out, m, rank, t.threads) // ∂W2 = ∂Sᵀ·A
	colSum(t.g[3], s, m, out, t.acc)                      // ∂B2
	kernels.Gemm(da, s, p.W2, m, out, rank, t.threads)    // ∂A = ∂S·W2
	for i, v := range h {
		if !(v > 0) {
			da[i] = 0 // ReLU passes the gradient only where it was active
		}
	}
	transpose(dhT, da, m, rank)
	kernels.Gemm(t.g[0], dhT, xb, rank, m, in, t.threads) // ∂W1 = ∂Hᵀ·X
	colSum(t.g[1], da, m, rank, t.acc)                    // ∂B1
	return loss
}

// step applies one Adam update (decoupled weight decay on W1 and W2).
func (t *trainer) step(lr, wd float64) {
	t.t++
	c1 := 1 - math.Pow(adamBeta1, float64(t.t))
	c2 := 1 - math.Pow(adamBeta2, float64(t.t))
	for i, w := range t.params() {
		decay := 0.0
		if i == 0 || i == 2 {
			decay = wd
		}
		adamUpdate(w, t.g[i], t.m[i], t.v[i], lr, decay, c1, c2)
	}
}

// adamUpdate is the AdamW rule (common practice, no source): decay the
// weight by lr·wd, then step by lr·m̂/(√v̂+ε). Products are converted
// explicitly so that no build may fuse them into multiply-adds.
func adamUpdate(w, g []float32, m, v []float64, lr, wd, c1, c2 float64) {
	lrwd := lr * wd
	for i, gi := range g {
		gg := float64(gi)
		m[i] = float64(adamBeta1*m[i]) + float64((1-adamBeta1)*gg)
		v[i] = float64(adamBeta2*v[i]) + float64(float64((1-adamBeta2)*gg)*gg)
		wi := float64(w[i])
		wi -= float64(lrwd * wi)
		wi -= float64(lr*(m[i]/c1)) / (math.Sqrt(v[i]/c2) + adamEps)
		w[i] = float32(wi)
	}
}

// forward computes h = X·W1ᵀ + B1, a = relu(h) and s = a·W2ᵀ + B2 for m rows.
func forward(p *Predictor, h, a, s, x []float32, m, threads int) {
	w1 := &kernels.Mat{DType: kernels.F32, Out: p.Rank, In: p.In, F32: p.W1}
	w2 := &kernels.Mat{DType: kernels.F32, Out: p.Out, In: p.Rank, F32: p.W2}
	kernels.Linear(h, x, m, w1, p.B1, threads)
	copy(a, h)
	kernels.ReLU(a)
	kernels.Linear(s, a, m, w2, p.B2, threads)
}

// bceTerm returns the weighted binary cross-entropy of logit z against label
// y, max(z,0) − z·y + log(1+exp(−|z|)) (the stable form; common practice,
// no source), and its derivative w·(σ(z) − y); w is posW for y = 1, else 1.
func bceTerm(z float64, y uint8, posW float64) (loss, grad float64) {
	e := math.Exp(-math.Abs(z))
	loss = math.Max(z, 0) + math.Log1p(e)
	sig := 1 / (1 + e)
	if z < 0 {
		sig = e / (1 + e)
	}
	if y == 0 {
		return loss, sig
	}
	return float64(posW * (loss - z)), float64(posW * (sig - 1))
}

// bceGrad replaces each score s[i] by scale·∂ℓ/∂s[i] and returns scale·Σℓ.
func bceGrad(s []float32, y []uint8, posW, scale float64) float64 {
	var total float64
	for i, z := range s {
		l, g := bceTerm(float64(z), y[i], posW)
		total += l
		s[i] = float32(g * scale)
	}
	return float64(total * scale)
}

// transpose writes the cols×rows transpose of the rows×cols matrix src.
func transpose(dst, src []float32, rows, cols int) {
	for r := 0; r < rows; r++ {
		for c, v := range src[r*cols : (r+1)*cols] {
			dst[c*rows+r] = v
		}
	}
}

// colSum sets dst[c] = Σ_r src[r][c] for the rows×cols matrix src,
// accumulating in float64 over ascending r; acc is scratch of len ≥ cols.
func colSum(dst, src []float32, rows, cols int, acc []float64) {
	acc = acc[:cols]
	clear(acc)
	for r := 0; r < rows; r++ {
		for c, v := range src[r*cols : (r+1)*cols] {
			acc[c] += float64(v)
		}
	}
	for c, v := range acc {
		dst[c] = float32(v)
	}
}

// An evaluator scores held-out rows in chunks and measures loss and recall.
type evaluator struct {
	p       *Predictor
	threads int
	h, a, s []float32
	idx     []int32  // the kept set of one row
	keys    []uint64 // top-k scratch
}

func newEvaluator(p *Predictor, threads int) *evaluator {
	return &evaluator{p: p, threads: threads,
		h: make([]float32, evalChunk*p.Rank), a: make([]float32, evalChunk*p.Rank),
		s: make([]float32, evalChunk*p.Out), idx: make([]int32, 0, p.Out), keys: make([]uint64, 2*p.Out)}
}

// run returns the mean weighted cross-entropy per label over n rows and the
// mean recall at k over the rows that have an active unit (0 if none has).
func (e *evaluator) run(x []float32, active []uint8, n, k int, posW float64) (loss, recall float64) {
	in, rank, out := e.p.In, e.p.Rank, e.p.Out
	var lossSum, recallSum float64
	counted := 0
	for r0 := 0; r0 < n; r0 += evalChunk {
		m := min(evalChunk, n-r0)
		s := e.s[:m*out]
		forward(e.p, e.h[:m*rank], e.a[:m*rank], s, x[r0*in:(r0+m)*in], m, e.threads)
		y := active[r0*out : (r0+m)*out]
		for i, z := range s {
			l, _ := bceTerm(float64(z), y[i], posW)
			lossSum += l
		}
		for i := 0; i < m; i++ {
			hits, nAct := topKHits(s[i*out:(i+1)*out], y[i*out:(i+1)*out], k, e.idx, e.keys)
			if nAct > 0 {
				recallSum += float64(hits) / float64(nAct)
				counted++
			}
		}
	}
	loss = lossSum / float64(n*out)
	if counted > 0 {
		recall = recallSum / float64(counted)
	}
	return loss, recall
}

// topKHits counts the active units among the k highest scores (ties to the
// lower index, as TopK; NaN lowest) and the active units in all; idx and
// keys are topKKeys's scratch (capacity len(scores), and 2·len(scores)).
func topKHits(scores []float32, active []uint8, k int, idx []int32, keys []uint64) (hits, nAct int) {
	nAct = countActive(active)
	if nAct == 0 {
		return 0, 0
	}
	for _, i := range topKKeys(idx, keys, scores, k) {
		hits += int(active[i])
	}
	return hits, nAct
}

// ranksBefore orders units by descending score, NaN last, ties to the lower
// index: a strict total order, the one TopK uses.
func ranksBefore(scores []float32, a, b int32) bool {
	sa, sb := scores[a], scores[b]
	switch {
	case sa != sa: // NaN
		return sb != sb && a < b
	case sb != sb:
		return true
	case sa != sb:
		return sa > sb
	}
	return a < b
}
