package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

// demoConfigLayers reads num_hidden_layers from the demo model's config.json.
func demoConfigLayers(t *testing.T, model string) int {
	t.Helper()
	raw, err := os.ReadFile(filepath.Join(model, "config.json"))
	require.NoError(t, err)
	var cfg struct {
		Layers int `json:"num_hidden_layers"`
	}
	require.NoError(t, json.Unmarshal(raw, &cfg))
	return cfg.Layers
}

// The fixtures' manifests list demoLayers layers; a retrained demo model
// with another depth must change the constant with it.
func TestDemoLayersMatchConfig(t *testing.T) {
	require.Equal(t, demoConfigLayers(t, demoModelSrc), demoLayers)
}
