package reporters

import (
	"fmt"
	"io"

	"sparsegate/golden"
)

// JSON writes the whole verdict as golden.EncodeVerdict encodes it, schema
// version included; golden.DecodeVerdict reads it back.
type JSON struct{}

// Report writes v as indented JSON.
func (JSON) Report(w io.Writer, v *golden.Verdict) error {
	b, err := golden.EncodeVerdict(v)
	if err != nil {
		return fmt.Errorf("json report: %w", err)
	}
	if _, err := w.Write(b); err != nil {
		return fmt.Errorf("json report: %w", err)
	}
	return nil
}
