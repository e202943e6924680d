package gen

import (
	"fmt"
	"math/rand/v2"
	"strings"
)

// Sizes say how much of each split to draw.
type Sizes struct {
	// TrainDocs, ValidDocs, HeldOutDocs and WeatherDocs count documents.
	// The validation split serves the trainer's model selection only.
	TrainDocs, ValidDocs, HeldOutDocs, WeatherDocs int
	// Items and Pool count probe items per family: held-out items, and the
	// separate pool few-shot examples are drawn from.
	Items, Pool int
	// DrillDocs counts retrieval drills (see World.Drill), the trainer's
	// curriculum; they are training text too.
	DrillDocs int
	// DevItems counts, per family, the items the trainer scores for model
	// selection; they are disjoint from the held-out items and the pools.
	DevItems int
}

// DefaultSizes are the sizes the demo model was trained and measured with.
func DefaultSizes() Sizes {
	return Sizes{TrainDocs: 16000, ValidDocs: 300, HeldOutDocs: 400, WeatherDocs: 300, Items: 320, Pool: 64,
		DrillDocs: 6000, DevItems: 100}
}

// Data is every split of the scenario for one seed.
type Data struct {
	// Train, Valid, HeldOut and Weather are documents, each ending with a newline.
	Train, Valid, HeldOut, Weather []string
	// Items and Pools hold, per family, the held-out items and the few-shot pool.
	Items, Pools map[string][]Item
	// Drill holds the retrieval drills, drawn after everything else so that
	// adding them changed no other split.
	Drill []string
	// Dev holds, per family, the trainer's model-selection items.
	Dev map[string][]Item
}

// Stream numbers keep the splits' random draws independent of each other and
// of the sizes of the other splits.
const (
	streamTrain = iota + 100
	streamHeldOut
	streamWeather
	streamItems
	streamPool
	streamValid
	streamDrill
	streamDev
)

// Generate draws all splits. Held-out documents equal to a training document
// are redrawn, and so are items whose context occurs in the pool or earlier
// among the items; for the in-context families (lookup, next), whose answers
// live in the prompt, also items whose context occurs in training. The
// arithmetic families (sum, weekday) are small fact tables the model must
// have learned, so their questions recur in training by design.
func Generate(seed uint64, s Sizes) (*Data, error) {
	w := NewWorld(seed)
	d := &Data{Items: map[string][]Item{}, Pools: map[string][]Item{}, Dev: map[string][]Item{}}
	rng := func(stream uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, stream)) }

	seenDoc := map[string]bool{}
	seenCtx, trainCtx := map[string]bool{}, map[string]bool{}
	rec := func(c string) { trainCtx[c] = true }
	r := rng(streamTrain)
	for len(d.Train) < s.TrainDocs {
		doc := w.document(r, rec)
		seenDoc[doc] = true
		d.Train = append(d.Train, doc)
	}
	for _, split := range []struct {
		stream uint64
		n      int
		dst    *[]string
	}{{streamValid, s.ValidDocs, &d.Valid}, {streamHeldOut, s.HeldOutDocs, &d.HeldOut}} {
		r := rng(split.stream)
		for tries := 0; len(*split.dst) < split.n; tries++ {
			if tries > 10*split.n+100 {
				return nil, fmt.Errorf("could not draw %d documents distinct from training", split.n)
			}
			if doc := w.Document(r); !seenDoc[doc] {
				seenDoc[doc] = true
				*split.dst = append(*split.dst, doc)
			}
		}
	}
	r = rng(streamWeather)
	for len(d.Weather) < s.WeatherDocs {
		d.Weather = append(d.Weather, w.Bulletin(r))
	}
	for fi, fam := range Families() {
		for _, split := range []struct {
			stream uint64
			n      int
			dst    map[string][]Item
		}{{streamPool, s.Pool, d.Pools}, {streamItems, s.Items, d.Items}, {streamDev, s.DevItems, d.Dev}} {
			r := rng(split.stream*16 + uint64(fi))
			for tries := 0; len(split.dst[fam]) < split.n; tries++ {
				if tries > 50*split.n+100 {
					return nil, fmt.Errorf("could not draw %d distinct %s items", split.n, fam)
				}
				it := w.NewItem(r, fam, len(split.dst[fam]))
				if seenCtx[it.Context] || (inContext(fam) && trainCtx[it.Context]) {
					continue
				}
				seenCtx[it.Context] = true
				split.dst[fam] = append(split.dst[fam], it)
			}
		}
	}
	// Drills must not teach an in-context probe question: a drill table or
	// route whose question would be an item's, a pool example's or a dev
	// item's context is redrawn.
	r = rng(streamDrill)
	skip := func(c string) bool { return seenCtx[c] }
	for len(d.Drill) < s.DrillDocs {
		d.Drill = append(d.Drill, w.Drill(r, skip))
	}
	return d, nil
}

// inContext reports families whose answer is given in the prompt itself.
func inContext(family string) bool { return family == "lookup" || family == "next" }

// Text joins documents into one text file; a blank line separates them.
func Text(docs []string) string { return strings.Join(docs, "\n") }
