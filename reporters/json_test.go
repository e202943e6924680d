package reporters

import (
	"testing"

	"github.com/google/go-cmp/cmp"

	"sparsegate/golden"
)

func TestJSONRoundTrip(t *testing.T) {
	v := failingVerdict()
	data := render(t, JSON{}, v)
	back, err := golden.DecodeVerdict("verdict.json", data)
	if err != nil {
		t.Fatal(err)
	}
	if d := cmp.Diff(v, back); d != "" {
		t.Errorf("verdict changed through JSON (-want +got):\n%s", d)
	}
}

func TestTruncatedJSONIsRefused(t *testing.T) {
	data := render(t, JSON{}, failingVerdict())
	if _, err := golden.DecodeVerdict("verdict.json", data[:len(data)/2]); err == nil {
		t.Error("DecodeVerdict accepted half a verdict file")
	}
}
