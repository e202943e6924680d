package sparsity

import (
	"fmt"
	"io"
	"strings"
)

// WriteTable prints the build's rules per layer and component: mode, budget
// k of the width, predictor rank and input, calibration recall and kept
// fraction, and the share of the component's dense multiply-adds a token still
// does (predictor included; "-" where it depends on the data, and oracle
// selection needs the dense result, so it saves nothing).
func (b *Build) WriteTable(w io.Writer) error {
	var s strings.Builder
	fmt.Fprintf(&s, "%-22s %-9s %11s %5s %-8s %7s %7s %7s\n", "unit", "mode", "k/width", "rank", "input", "recall", "kept", "FLOPs")
	cfg := b.Base.Config
	for _, lr := range b.Layers() {
		for _, c := range Components() {
			u := Unit{Layer: lr.Layer, Component: c}
			r := b.Rule(u)
			width := b.Width(u)
			k, rank, input, recall, kept, share := "-", "-", "-", "-", "-", "-"
			switch r.Mode {
			case Dense:
				k, share = fmt.Sprintf("%d/%d", width, width), "100.0%"
			case Oracle:
				k, share = fmt.Sprintf("%d/%d", r.K, width), "100.0%"
			case Static:
				k = fmt.Sprintf("%d/%d", len(r.Keep), width)
				share = fmt.Sprintf("%.1f%%", 100*(1-flopsSaved(cfg.Hidden, width, len(r.Keep), 0, c, cfg.Activation == "silu")))
			case PredictorMode:
				k, rank, input = fmt.Sprintf("%d/%d", r.K, width), fmt.Sprint(r.Rank), r.Input
				share = fmt.Sprintf("%.1f%%", 100*(1-flopsSaved(cfg.Hidden, width, r.K, r.Rank, c, cfg.Activation == "silu")))
			}
			if cal := r.Calibration; cal != nil {
				recall, kept = fmt.Sprintf("%.3f", cal.Recall), fmt.Sprintf("%.3f", cal.KeptFraction)
			}
			fmt.Fprintf(&s, "%-22s %-9s %11s %5s %-8s %7s %7s %7s\n", u, r.Mode, k, rank, input, recall, kept, share)
		}
	}
	_, err := io.WriteString(w, s.String())
	return err
}
