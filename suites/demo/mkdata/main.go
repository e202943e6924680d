// Command mkdata writes the demo scenario's data: the committed held-out
// splits and probe items (into suites/demo/data), and the training workspace
// the offline trainer reads (training and validation text, their token ids,
// and the trained tokenizer).
//
//	go run ./suites/demo/mkdata --out /tmp/demo-train
package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"log"
	"math/rand/v2"
	"os"
	"path/filepath"

	"sparsegate/harness/atomicfile"
	"sparsegate/harness/tokenize"
	"sparsegate/suites/demo/gen"
)

func main() {
	log.SetFlags(0)
	log.SetPrefix("mkdata: ")
	seed := flag.Uint64("seed", 1, "scenario seed")
	vocab := flag.Int("vocab", 2048, "tokenizer vocabulary size")
	out := flag.String("out", "", "training workspace to write (required)")
	data := flag.String("data", "suites/demo/data", "directory for the committed held-out data")
	sizes := gen.DefaultSizes()
	flag.IntVar(&sizes.DrillDocs, "drills", sizes.DrillDocs, "retrieval drill documents to write (drill.u16); drawn last, so no other split changes")
	flag.Parse()
	if *out == "" {
		log.Fatal("--out DIR is required")
	}
	if sizes.DrillDocs < 1 {
		log.Fatalf("--drills %d: give at least 1", sizes.DrillDocs)
	}
	d, err := gen.Generate(*seed, sizes)
	if err != nil {
		log.Fatal(err)
	}
	if err := gen.WriteData(*data, d); err != nil {
		log.Fatal(err)
	}
	tok, err := gen.TrainTokenizer(d, *vocab)
	if err != nil {
		log.Fatal(err)
	}
	model := filepath.Join(*out, "model")
	if err := os.MkdirAll(model, 0o755); err != nil {
		log.Fatal(err)
	}
	if err := tok.Save(model); err != nil {
		log.Fatal(err)
	}
	for name, docs := range map[string][]string{"train.txt": d.Train, "valid.txt": d.Valid} {
		if err := atomicfile.WriteFile(filepath.Join(*out, name), []byte(gen.Text(docs))); err != nil {
			log.Fatal(err)
		}
	}
	nTrain, err := gen.WriteIDs(filepath.Join(*out, "train.u16"), tok, d.Train)
	if err != nil {
		log.Fatal(err)
	}
	nValid, err := gen.WriteIDs(filepath.Join(*out, "valid.u16"), tok, d.Valid)
	if err != nil {
		log.Fatal(err)
	}
	nDrill, err := gen.WriteIDs(filepath.Join(*out, "drill.u16"), tok, d.Drill)
	if err != nil {
		log.Fatal(err)
	}
	if err := writeDev(filepath.Join(*out, "dev.json"), tok, d); err != nil {
		log.Fatal(err)
	}
	bos, _ := tok.BOS()
	eos, _ := tok.EOS()
	pad, _ := tok.PAD()
	meta, _ := json.MarshalIndent(map[string]any{
		"seed": *seed, "vocab": tok.VocabSize(), "bos": bos, "eos": eos, "pad": pad,
		"train_tokens": nTrain, "valid_tokens": nValid, "train_docs": len(d.Train),
		"drill_tokens": nDrill, "drill_docs": len(d.Drill),
	}, "", "  ")
	if err := atomicfile.WriteFile(filepath.Join(*out, "meta.json"), append(meta, '\n')); err != nil {
		log.Fatal(err)
	}
	fmt.Printf("wrote %s: %d training tokens, %d drill tokens, %d validation tokens, vocabulary %d (%s)\n", *out, nTrain, nDrill, nValid, tok.VocabSize(), tok.Describe())
}

// devProbe is one dev item as the trainer scores it: the token ids of the
// 4-shot prompt (BOS first) and of each option, and the right option.
type devProbe struct {
	Prompt  []int   `json:"prompt"`
	Options [][]int `json:"options"`
	Answer  int     `json:"answer"`
}

// writeDev writes, per family, the dev items as 4-shot multiple-choice
// probes built the way the quality test builds them (shots from the pool,
// joined by blank lines), so the trainer can log few-shot accuracy for model
// selection without touching the held-out items.
func writeDev(path string, tok *tokenize.Tokenizer, d *gen.Data) error {
	out := map[string][]devProbe{}
	r := rand.New(rand.NewPCG(11, 11))
	for _, fam := range gen.Families() {
		pool := d.Pools[fam]
		for _, it := range d.Dev[fam] {
			p := devProbe{Prompt: tok.EncodeForModel(gen.FewShotPrompt(pool, it, 4, r)), Answer: it.Answer}
			for _, o := range it.Options {
				p.Options = append(p.Options, tok.Encode(o))
			}
			out[fam] = append(out[fam], p)
		}
	}
	js, err := json.Marshal(out)
	if err != nil {
		return err
	}
	return atomicfile.WriteFile(path, append(js, '\n'))
}
