package sparsity

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"
)

func testRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0x7e57)) }

func normals(r *rand.Rand, n int) []float32 {
	v := make([]float32, n)
	for i := range v {
		v[i] = float32(r.NormFloat64())
	}
	return v
}

// loss64 is the float64 twin of the trainer's forward pass and loss: the
// mean over the m·out labels of the class-weighted cross-entropy, written
// here in the plain textbook form −w·[y·log σ(s) + (1−y)·log(1−σ(s))]
// rather than the trainer's stable rearrangement.
func loss64(w1, b1, w2, b2, x []float64, y []uint8, m, in, rank, out int, posW float64) float64 {
	var total float64
	hid := make([]float64, rank)
	for b := 0; b < m; b++ {
		for r := 0; r < rank; r++ {
			acc := b1[r]
			for k := 0; k < in; k++ {
				acc += w1[r*in+k] * x[b*in+k]
			}
			hid[r] = math.Max(acc, 0)
		}
		for o := 0; o < out; o++ {
			s := b2[o]
			for r := 0; r < rank; r++ {
				s += w2[o*rank+r] * hid[r]
			}
			sig := 1 / (1 + math.Exp(-s))
			if y[b*out+o] == 1 {
				total -= posW * math.Log(sig)
			} else {
				total -= math.Log(1 - sig)
			}
		}
	}
	return total / float64(m*out)
}

func to64(v []float32) []float64 {
	d := make([]float64, len(v))
	for i, x := range v {
		d[i] = float64(x)
	}
	return d
}

func TestGradientMatchesFiniteDifferences(t *testing.T) {
	const in, rank, out, m, posW = 5, 3, 4, 6, 2.5
	r := testRand(1)
	p := NewPredictor(in, rank, out)
	for _, v := range [][]float32{p.W1, p.B1, p.W2, p.B2} {
		for i := range v {
			v[i] = float32(r.Float64()*2 - 1)
		}
	}
	x := normals(r, m*in)
	y := make([]uint8, m*out)
	for i := range y {
		if r.IntN(3) == 0 {
			y[i] = 1
		}
	}
	// Keep every pre-activation away from the ReLU kink, where the finite
	// difference would straddle two pieces.
	h := make([]float32, m*rank)
	forward(p, h, make([]float32, m*rank), make([]float32, m*out), x, m, 1)
	for i, v := range h {
		if math.Abs(float64(v)) < 1e-2 {
			t.Fatalf("pre-activation %d = %v is too close to 0 for this seed; pick another", i, v)
		}
	}

	tr := newTrainer(p, m, 1)
	copy(tr.xb, x)
	copy(tr.yb, y)
	gotLoss := tr.gradient(m, posW)

	theta := [4][]float64{to64(p.W1), to64(p.B1), to64(p.W2), to64(p.B2)}
	x64 := to64(x)
	f := func() float64 {
		return loss64(theta[0], theta[1], theta[2], theta[3], x64, y, m, in, rank, out, posW)
	}
	if want := f(); math.Abs(gotLoss-want) > 1e-6*want {
		t.Errorf("loss = %v, float64 twin says %v", gotLoss, want)
	}
	names := [4]string{"W1", "B1", "W2", "B2"}
	const step = 1e-6
	numeric := [4][]float64{}
	maxAbs := 0.0
	for blk := range theta {
		numeric[blk] = make([]float64, len(theta[blk]))
		for i := range theta[blk] {
			orig := theta[blk][i]
			theta[blk][i] = orig + step
			up := f()
			theta[blk][i] = orig - step
			down := f()
			theta[blk][i] = orig
			numeric[blk][i] = (up - down) / (2 * step)
			maxAbs = math.Max(maxAbs, math.Abs(numeric[blk][i]))
		}
	}
	if maxAbs == 0 {
		t.Fatal("all numeric gradients are zero: the check would be vacuous")
	}
	// Relative error, with a floor at 1e-3 of the largest gradient so that
	// components that are zero (or nearly) are judged on an absolute scale.
	for blk := range theta {
		for i, want := range numeric[blk] {
			got := float64(tr.g[blk][i])
			denom := math.Max(math.Max(math.Abs(want), math.Abs(got)), 1e-3*maxAbs)
			if rel := math.Abs(got-want) / denom; rel > 1e-4 {
				t.Errorf("∂L/∂%s[%d] = %.9g, finite difference %.9g (relative error %.2g)", names[blk], i, got, want, rel)
			}
		}
	}
}

// plantedTopK draws n rows x ~ N(0, I) and marks active the k units with
// the highest scores U·(V·x) of a fixed rank-3 map.
func plantedTopK(r *rand.Rand, u, v []float32, n, in, out, k int) ([]float32, []uint8) {
	const r0 = 3
	x := normals(r, n*in)
	y := make([]uint8, n*out)
	z := make([]float32, r0)
	s := make([]float32, out)
	for b := 0; b < n; b++ {
		for q := 0; q < r0; q++ {
			var acc float32
			for c := 0; c < in; c++ {
				acc += v[q*in+c] * x[b*in+c]
			}
			z[q] = acc
		}
		for o := 0; o < out; o++ {
			var acc float32
			for q := 0; q < r0; q++ {
				acc += u[o*r0+q] * z[q]
			}
			s[o] = acc
		}
		for _, o := range TopK(nil, s, k) {
			y[b*out+int(o)] = 1
		}
	}
	return x, y
}

func TestTrainLearnsPlantedTopK(t *testing.T) {
	const in, out, k, n = 16, 32, 8, 4000
	r := testRand(2)
	u, v := normals(r, out*3), normals(r, 3*in)
	x, y := plantedTopK(r, u, v, n, in, out, k)
	p, rep, err := TrainPredictor(x, y, n, in, out, TrainOptions{Rank: 32, Epochs: 40, Patience: 8, LR: 3e-3, K: k, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("epochs %d, best %d, valid recall %.4f, loss %.4f", rep.Epochs, rep.BestEpoch, rep.ValidRecall, rep.ValidLoss)
	if rep.ValidRecall < 0.95 {
		t.Errorf("validation recall at k=%d is %.4f, want ≥ 0.95", k, rep.ValidRecall)
	}
	// Fresh rows from the same rule: the predictor generalises.
	xt, yt := plantedTopK(r, u, v, 1000, in, out, k)
	if got := RecallAtK(p, xt, yt, 1000, k); got < 0.93 {
		t.Errorf("recall on fresh rows = %.4f, want ≥ 0.93", got)
	}
	// An untrained predictor of the same shape sits near chance, k/out.
	rnd := initPredictor(in, 32, out, make([]int, out), 1, rand.NewPCG(9, 9))
	fillUniform(rnd.B2, 1e-3, rand.NewPCG(10, 10))
	chance := RecallAtK(rnd, xt, yt, 1000, k)
	if chance > 0.4 || rep.ValidRecall < chance+0.5 {
		t.Errorf("random predictor recall %.4f (chance %.4f) is not clearly below the trained %.4f", chance, float64(k)/out, rep.ValidRecall)
	}
	if rep.Rows != n || rep.ValidRows != n/10 || rep.TrainRows != n-n/10 {
		t.Errorf("rows %d = %d train + %d valid, want %d = %d + %d", rep.Rows, rep.TrainRows, rep.ValidRows, n, n-n/10, n/10)
	}
	if want := float64(k) / out; math.Abs(rep.PositiveRate-want) > 1e-12 {
		t.Errorf("positive rate %v, want %v", rep.PositiveRate, want)
	}
}

func predictorsEqual(a, b *Predictor) bool {
	eq := func(x, y []float32) bool {
		return slices.EqualFunc(x, y, func(p, q float32) bool { return math.Float32bits(p) == math.Float32bits(q) })
	}
	return eq(a.W1, b.W1) && eq(a.B1, b.B1) && eq(a.W2, b.W2) && eq(a.B2, b.B2)
}

func TestTrainDeterministic(t *testing.T) {
	// Large enough that the kernels would split the products over two
	// workers when GOMAXPROCS allows it.
	const in, out, k, n = 64, 256, 16, 640
	r := testRand(4)
	x, y := plantedTopK(r, normals(r, out*3), normals(r, 3*in), n, in, out, k)
	opts := TrainOptions{Rank: 32, Epochs: 2, K: k, Seed: 5}
	run := func(procs int) (*Predictor, *TrainReport) {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		p, rep, err := TrainPredictor(x, y, n, in, out, opts)
		if err != nil {
			t.Fatal(err)
		}
		return p, rep
	}
	p1, rep1 := run(1)
	p2, rep2 := run(2)
	p3, _ := run(2)
	if !predictorsEqual(p1, p2) || !predictorsEqual(p2, p3) {
		t.Error("weights differ between runs (GOMAXPROCS 1 vs 2, or two runs at 2)")
	}
	if !slices.Equal(rep1.History, rep2.History) {
		t.Errorf("histories differ: %v vs %v", rep1.History, rep2.History)
	}
	opts.Seed = 6
	p4, _ := run(2)
	if predictorsEqual(p1, p4) {
		t.Error("a different Seed gave identical weights")
	}
}

// fixedRateRows gives every row exactly pos active units out of out, at
// shifting positions, so any split sees negatives/positives = (out−pos)/pos.
func fixedRateRows(r *rand.Rand, n, in, out, pos int) ([]float32, []uint8) {
	y := make([]uint8, n*out)
	for b := 0; b < n; b++ {
		for j := 0; j < pos; j++ {
			y[b*out+(b+j)%out] = 1
		}
	}
	return normals(r, n*in), y
}

func TestPosWeight(t *testing.T) {
	if got := autoPosWeight(90, 10); got != 9 {
		t.Errorf("autoPosWeight(90, 10) = %v, want 9", got)
	}
	if got := autoPosWeight(990, 10); got != maxAutoPosWeight {
		t.Errorf("autoPosWeight(990, 10) = %v, want the cap %v", got, maxAutoPosWeight)
	}
	r := testRand(7)
	for _, c := range []struct {
		out, pos int
		given    float64
		want     float64
	}{{12, 3, 0, 3}, {100, 1, 0, 50}, {12, 3, 7, 7}} {
		x, y := fixedRateRows(r, 50, 4, c.out, c.pos)
		_, rep, err := TrainPredictor(x, y, 50, 4, c.out, TrainOptions{Rank: 2, Epochs: 1, K: 1, PosWeight: c.given})
		if err != nil {
			t.Fatal(err)
		}
		if rep.PosWeight != c.want {
			t.Errorf("out %d, %d active, PosWeight option %v: used %v, want %v", c.out, c.pos, c.given, rep.PosWeight, c.want)
		}
	}
}

func TestEarlyStopping(t *testing.T) {
	// Labels independent of x: validation recall only wanders, so patience
	// runs out long before the epoch limit.
	const in, out, k, n, epochs, patience = 8, 16, 4, 400, 60, 2
	r := testRand(8)
	x := normals(r, n*in)
	y := make([]uint8, n*out)
	for i := range y {
		y[i] = uint8(r.IntN(2))
	}
	var calls []float64
	opts := TrainOptions{Rank: 4, Epochs: epochs, Patience: patience, K: k, Seed: 11,
		Progress: func(epoch, total int, recall float64) {
			if epoch != len(calls)+1 || total != epochs {
				t.Errorf("Progress(%d, %d) after %d calls", epoch, total, len(calls))
			}
			calls = append(calls, recall)
		}}
	p, rep, err := TrainPredictor(x, y, n, in, out, opts)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Epochs >= epochs || rep.Epochs != rep.BestEpoch+patience || len(rep.History) != rep.Epochs {
		t.Fatalf("ran %d of %d epochs (best %d, patience %d, %d history rows)", rep.Epochs, epochs, rep.BestEpoch, patience, len(rep.History))
	}
	for i, h := range rep.History {
		if h.ValidRecall != calls[i] {
			t.Errorf("epoch %d: Progress saw recall %v, history %v", i+1, calls[i], h.ValidRecall)
		}
		better := h.ValidRecall > rep.ValidRecall || (h.ValidRecall == rep.ValidRecall && i+1 < rep.BestEpoch)
		if better {
			t.Errorf("epoch %d recall %v beats the reported best (epoch %d, %v)", i+1, h.ValidRecall, rep.BestEpoch, rep.ValidRecall)
		}
	}
	if h := rep.History[rep.BestEpoch-1]; h.ValidRecall != rep.ValidRecall || h.ValidLoss != rep.ValidLoss {
		t.Errorf("best epoch stats %+v disagree with the report (%v, %v)", h, rep.ValidRecall, rep.ValidLoss)
	}
	// The returned weights are those after the best epoch: a run that stops
	// there ends on exactly them.
	opts.Epochs, opts.Progress = rep.BestEpoch, nil
	short, _, err := TrainPredictor(x, y, n, in, out, opts)
	if err != nil {
		t.Fatal(err)
	}
	if !predictorsEqual(p, short) {
		t.Error("returned weights are not those of the best epoch")
	}
}

func TestTrainBadArguments(t *testing.T) {
	const in, out, n = 3, 5, 20
	r := testRand(12)
	x, y := fixedRateRows(r, n, in, out, 2)
	nan := slices.Clone(x)
	nan[7] = float32(math.NaN())
	two := slices.Clone(y)
	two[11] = 2
	ok := TrainOptions{K: 2, Rank: 2, Epochs: 1}
	for _, c := range []struct {
		name string
		x    []float32
		y    []uint8
		n    int
		opts TrainOptions
		want string
	}{
		{"short x", x[:len(x)-1], y, n, ok, "x holds 59 values, want n·in = 20·3 = 60"},
		{"long active", x, append(slices.Clone(y), 0), n, ok, "active holds 101 values, want n·out = 20·5 = 100"},
		{"K zero", x, y, n, TrainOptions{}, "K = 0 is out of range: the budget must be 1..5"},
		{"K too big", x, y, n, TrainOptions{K: 6}, "K = 6 is out of range: the budget must be 1..5"},
		{"too few rows", x[:5*in], y[:5*out], 5, ok, "need at least 10 rows"},
		{"too few rows for fraction", x[:3*in], y[:3*out], 3, TrainOptions{K: 1, ValidFraction: 0.3}, "need at least 4 rows"},
		{"bad fraction", x, y, n, TrainOptions{K: 1, ValidFraction: 1}, "ValidFraction = 1 must lie in [0, 1)"},
		{"negative rank", x, y, n, TrainOptions{K: 1, Rank: -1}, "Rank = -1 is negative"},
		{"NaN LR", x, y, n, TrainOptions{K: 1, LR: math.NaN()}, "LR = NaN must be finite"},
		{"NaN input", nan, y, n, ok, "x row 2 column 1 is NaN"},
		{"label 2", x, two, n, ok, "active row 2 unit 1 is 2"},
		{"no positives", x, make([]uint8, n*out), n, ok, "training rows have no active unit"},
	} {
		p, rep, err := TrainPredictor(c.x, c.y, c.n, in, out, c.opts)
		if err == nil || p != nil || rep != nil {
			t.Errorf("%s: got (%v, %v, %v), want an error", c.name, p, rep, err)
			continue
		}
		if !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %q does not contain %q", c.name, err, c.want)
		}
	}
}

func TestRecallAtKHandExample(t *testing.T) {
	// W = 0 so every row scores B2 = [4, 1, 3, 2]: the top 2 are units 0 and 2.
	p := NewPredictor(2, 1, 4)
	copy(p.B2, []float32{4, 1, 3, 2})
	y := []uint8{
		1, 1, 0, 0, // 1 of 2 active in the top 2: 0.5
		0, 0, 0, 0, // no active unit: skipped
		0, 0, 1, 0, // 1 of 1: 1
	}
	if got := RecallAtK(p, make([]float32, 3*2), y, 3, 2); got != 0.75 {
		t.Errorf("recall = %v, want (0.5 + 1)/2 = 0.75", got)
	}
	if got := RecallAtK(p, make([]float32, 2), make([]uint8, 4), 1, 2); got != 0 {
		t.Errorf("recall with no active unit = %v, want 0", got)
	}
}

func TestRecallAtKMatchesScoresAndTopK(t *testing.T) {
	// More rows than one evaluation chunk, and ties, against the
	// one-row Scores + TopK path.
	const in, rank, out, k, n = 6, 4, 10, 3, evalChunk + 37
	r := testRand(13)
	p := initPredictor(in, rank, out, make([]int, out), 1, rand.NewPCG(1, 2))
	x := normals(r, n*in)
	for i := 0; i < 10; i++ {
		copy(x[i*in:(i+1)*in], make([]float32, in)) // zero rows: ties in B2
	}
	for i := 0; i < out; i += 2 {
		p.B2[i] = p.B2[i+1]
	}
	y := make([]uint8, n*out)
	for i := range y {
		y[i] = uint8(r.IntN(4) / 3)
	}
	var sum float64
	var rows int
	s, h := make([]float32, out), make([]float32, rank)
	for b := 0; b < n; b++ {
		p.Scores(s, h, x[b*in:(b+1)*in])
		act, hits := 0, 0
		for _, o := range TopK(nil, s, k) {
			hits += int(y[b*out+int(o)])
		}
		for _, v := range y[b*out : (b+1)*out] {
			act += int(v)
		}
		if act > 0 {
			sum += float64(hits) / float64(act)
			rows++
		}
	}
	want := sum / float64(rows)
	if got := RecallAtK(p, x, y, n, k); got != want {
		t.Errorf("RecallAtK = %v, Scores+TopK give %v", got, want)
	}
}

func BenchmarkTrainPredictor(b *testing.B) {
	const in, out, k, n = 256, 1024, 64, 4000
	r := testRand(14)
	x, y := plantedTopK(r, normals(r, out*3), normals(r, 3*in), n, in, out, k)
	opts := TrainOptions{Rank: 32, Epochs: 2, K: k, Seed: 1}
	for b.Loop() {
		if _, _, err := TrainPredictor(x, y, n, in, out, opts); err != nil {
			b.Fatal(err)
		}
	}
}

// topKKeys keeps the set a full sort by ranksBefore keeps on tie-heavy,
// sorted and reversed inputs, and ranks NaN below every number.
func TestTopKKeysOnTiesAndNaN(t *testing.T) {
	r := testRand(15)
	for trial := 0; trial < 300; trial++ {
		n := 1 + r.IntN(70)
		k := 1 + r.IntN(n)
		scores := make([]float32, n)
		levels := 1 + r.IntN(6) // few levels: many ties
		for i := range scores {
			scores[i] = float32(r.IntN(levels))
		}
		if trial%3 == 0 {
			slices.Sort(scores) // ascending, then descending inputs
			if trial%2 == 0 {
				slices.Reverse(scores)
			}
		}
		checkTopK(t, fmt.Sprintf("scores %v", scores), scores, k)
	}
	// NaN ranks below every number, -Inf included.
	scores := []float32{float32(math.NaN()), float32(math.Inf(-1)), 2, float32(math.NaN())}
	if got := topKKeys(nil, make([]uint64, 8), scores, 2); !slices.Equal(got, []int32{1, 2}) {
		t.Errorf("top 2 of %v = %v, want [1 2]", scores, got)
	}
}
