package golden

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"os"
	"slices"
	"strings"

	"sparsegate/suites"
)

// A Report is what Verify found.
type Report struct {
	// Files is the number of golden files checked.
	Files int
	// Entries is the number of approval log entries.
	Entries int
	// Problems lists every inconsistency, one line each.
	Problems []string
}

// Verify checks a golden directory: every golden file parses, its probe
// exists in the suite with the same kind, fingerprints agree across files
// (same base, candidate, suite and tokenizer), the approval log parses, and
// every file is byte for byte the one its latest log entry approved.
// Parse errors are returned as errors; inconsistencies go in the report.
func Verify(dir string, s *suites.Suite) (*Report, error) {
	if err := CheckDir(dir, true); err != nil {
		return nil, err
	}
	if err := Recover(dir); err != nil {
		return nil, err
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("reading golden directory: %w", err)
	}
	log, err := ReadLog(dir)
	if err != nil {
		return nil, err
	}
	rep := &Report{Entries: len(log)}
	approved := map[string]string{}
	for _, e := range log {
		for _, p := range e.Probes {
			approved[p.Probe] = p.SHA256
		}
	}
	var first *File
	for _, de := range entries {
		name, ok := strings.CutSuffix(de.Name(), Ext)
		if !ok {
			continue
		}
		path := Path(dir, name)
		f, err := ReadFile(path)
		if err != nil {
			return nil, err
		}
		rep.Files++
		if f.Probe != name {
			rep.Problems = append(rep.Problems, fmt.Sprintf("%s: records probe %q but is named for %q", path, f.Probe, name))
		}
		if s != nil {
			if sp := s.Probe(name); sp == nil {
				rep.Problems = append(rep.Problems, fmt.Sprintf("%s: the suite has no probe %q", path, name))
			} else if sp.Kind != f.Kind {
				rep.Problems = append(rep.Problems, fmt.Sprintf("%s: kind %s, but the suite's probe is %s", path, f.Kind, sp.Kind))
			}
		}
		if first == nil {
			first = f
		} else {
			a, b := first.Fingerprint, f.Fingerprint
			a.Probe, b.Probe = "", ""
			if a != b {
				rep.Problems = append(rep.Problems, fmt.Sprintf("%s: its fingerprint differs from %s's (recorded from another build or suite version)", path, Path(dir, first.Probe)))
			}
		}
		data, err := os.ReadFile(path)
		if err != nil {
			return nil, err
		}
		sum := sha256.Sum256(data)
		switch want, ok := approved[name]; {
		case !ok:
			rep.Problems = append(rep.Problems, fmt.Sprintf("%s: no approval log entry records it", path))
		case want != hex.EncodeToString(sum[:]):
			rep.Problems = append(rep.Problems, fmt.Sprintf("%s: its content differs from what the latest approval recorded (edited by hand, or an interrupted update)", path))
		}
	}
	slices.Sort(rep.Problems)
	return rep, nil
}
