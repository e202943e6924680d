// Package version holds the harness version that golden-file fingerprints and
// `sparsegate version` report.
package version

// Version is the harness version. Bump it whenever a change can move a
// computed number, so golden files record which harness produced them.
const Version = "0.1.0"
