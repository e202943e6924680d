package main

import (
	"fmt"
	"os"
	"path/filepath"

	"sparsegate/harness/engine"
	"sparsegate/harness/progress"
	"sparsegate/harness/textscore"
)

const scoreUsage = `usage: sparsegate score [--model DIR] [--text FILE] [--window N] [--stride N] [--threads N]

Score a text with a checkpoint: the text is encoded as the model sees it
(special tokens as its tokenizer configuration says) and every token but the
first is predicted once, with a sliding window of at most --window tokens that
moves --stride tokens at a time. Prints token count, mean negative
log-likelihood (nats per token), perplexity and bits per byte.

flags:
  --model DIR    checkpoint directory (default: the embedded demo model)
  --text FILE    text file to score (default with the demo model: its
                 in-domain held-out split)
  --window N     tokens per forward pass (default: the model's positions, at most
                 1024; 256 for the demo model, the window it was trained on)
  --stride N     step between windows (default: half the window)
  --threads N    kernel threads (default: all CPUs; results do not depend on it)

examples:
  sparsegate score
  sparsegate score --model ./models/opt-125m --text held-out.txt --window 512 --stride 256
`

func runScore(c *cli, args []string) error {
	fs := newFlags(c, "score", scoreUsage)
	model := fs.String("model", "", "checkpoint directory")
	text := fs.String("text", "", "text file")
	window := fs.Int("window", 0, "tokens per forward pass")
	stride := fs.Int("stride", 0, "step between windows")
	threads := fs.Int("threads", 0, "kernel threads")
	if err := parse(fs, args); err != nil {
		return err
	}
	switch {
	case *model != "" && *text == "":
		return usageError("score", "--text FILE is required with --model")
	case fs.NArg() > 0:
		return usageError("score", "unexpected arguments %q", fs.Args())
	case *window < 0 || *stride < 0 || *threads < 0:
		return usageError("score", "--window, --stride and --threads must not be negative")
	}
	modelDir, modelName, textPath, textName := *model, *model, *text, *text
	if modelDir == "" {
		root, cleanup, err := extractDemo()
		if err != nil {
			return err
		}
		defer cleanup()
		modelDir, modelName = demoModelDir(root), demoName
		if *window == 0 {
			*window = demoWindow // the demo model never saw positions beyond it
		}
		if textPath == "" {
			textPath, textName = filepath.Join(root, "data", "heldout.txt"), "(demo held-out split)"
		}
	}
	data, err := os.ReadFile(textPath)
	if err != nil {
		return fmt.Errorf("reading the text: %w", err)
	}
	m, err := engine.Load(modelDir, engine.Options{Threads: *threads})
	if err != nil {
		return err
	}
	defer m.Close()
	meter := progress.New(c.stderr, "scoring "+textName)
	r, err := textscore.Score(m, data, textscore.Options{Window: *window, Stride: *stride, Progress: meter.Update})
	meter.Done()
	if err != nil {
		return fmt.Errorf("%s: %w", textName, err)
	}
	_, err = fmt.Fprintf(c.stdout, "model        %s\ntext         %s (%d bytes)\ntokens       %d (%d scored in %d windows of at most %d, stride %d)\nmean NLL     %.6f nats/token\nperplexity   %.6f\nbits/byte    %.6f\n",
		modelName, textName, len(data), r.Tokens, r.Targets, r.Windows, r.Window, r.Stride, r.MeanNLL, r.Perplexity, r.BitsPerByte)
	return err
}
