package golden

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"sparsegate/harness/results"
	"sparsegate/suites"
)

// UpdateOptions describe a golden update.
type UpdateOptions struct {
	// Dir is the golden directory (created when missing).
	Dir string
	// Suite is the suite the results were produced by.
	Suite *suites.Suite
	// Results are the approved run's results (unsharded).
	Results *results.Results
	// Probes restricts the update to these probes (default: every probe
	// that ran).
	Probes []string
	// Reason says why the change is approved (required).
	Reason string
	// Who approves (required: a flag or the environment).
	Who string
	// Rebase allows replacing golden files recorded from another base or
	// another version of the suite.
	Rebase bool
	// Now is the approval time.
	Now time.Time
}

// A Plan is a checked golden update, ready to show and apply.
type Plan struct {
	dir   string
	Files []PlannedFile
	Entry Entry
}

// A PlannedFile is one golden file the plan writes.
type PlannedFile struct {
	Probe    string
	Path     string
	Old, New []byte // Old nil when the file is new
}

// Changed lists the files whose bytes change.
func (p *Plan) Changed() []PlannedFile {
	var out []PlannedFile
	for _, f := range p.Files {
		if string(f.Old) != string(f.New) {
			out = append(out, f)
		}
	}
	return out
}

// Diff is the text diff of every changed file, at most maxLines lines each.
func (p *Plan) Diff(maxLines int) string {
	var b strings.Builder
	for _, f := range p.Changed() {
		if f.Old == nil {
			// A new file: its fingerprint and metrics, not every item.
			lines := strings.Split(strings.TrimSuffix(string(f.New), "\n"), "\n")
			items := 0
			fmt.Fprintf(&b, "+++ %s (new file)\n", f.Path)
			for _, l := range lines {
				switch {
				case strings.HasPrefix(l, "metric "):
					b.WriteString("+" + l + "\n")
				case strings.HasPrefix(l, "item "), strings.HasPrefix(l, "unit "):
					items++
				}
			}
			fmt.Fprintf(&b, "+(and %d item and unit records)\n", items)
			continue
		}
		b.WriteString(TextDiff(f.Path, f.Path+" (new)", string(f.Old), string(f.New), 1, maxLines))
	}
	return b.String()
}

// PlanUpdate checks an update and computes the new files, writing nothing.
// It refuses without a reason or approver, on sharded or stale results, on
// probes that did not run, and, without Rebase, when a golden file was
// recorded from other base weights or another version of the suite.
func PlanUpdate(o UpdateOptions) (*Plan, error) {
	switch {
	case strings.TrimSpace(o.Reason) == "":
		return nil, errors.New("refusing to update golden files without a reason: pass --reason \"why this change is approved\"")
	case strings.TrimSpace(o.Who) == "":
		return nil, errors.New("refusing to update golden files without an approver: pass --who NAME or set SPARSEGATE_APPROVER")
	case o.Results.Shard.Count > 1:
		return nil, fmt.Errorf("the results are shard %d/%d; merge every shard's results first ('sparsegate merge') so the golden files hold every item", o.Results.Shard.Index, o.Results.Shard.Count)
	case o.Results.Suite.Hash != o.Suite.Hash:
		return nil, fmt.Errorf("the results were produced by another version of suite %s (hash %.12s…, now %.12s…); re-run the suite first", o.Suite.File, o.Results.Suite.Hash, o.Suite.Hash)
	}
	if err := CheckDir(o.Dir, false); err != nil {
		return nil, err
	}
	if err := Recover(o.Dir); err != nil {
		return nil, err
	}
	for _, name := range o.Probes {
		if o.Suite.Probe(name) == nil {
			return nil, fmt.Errorf("the suite has no probe %q", name)
		}
	}
	plan := &Plan{dir: o.Dir, Entry: Entry{Time: o.Now.UTC().Truncate(time.Second), Who: o.Who, Reason: o.Reason, Fingerprint: FingerprintOf(o.Results, nil)}}
	for _, sp := range o.Suite.Probes {
		selected := len(o.Probes) == 0 || slices.Contains(o.Probes, sp.Name)
		rp := o.Results.Probe(sp.Name)
		if !selected || rp == nil {
			continue
		}
		if rp.Status != results.Ran {
			if len(o.Probes) > 0 {
				return nil, fmt.Errorf("probe %q did not run (%s: %s); it cannot be recorded", sp.Name, rp.Status, rp.Note)
			}
			if rp.Status == results.Failed {
				return nil, fmt.Errorf("probe %q could not run (%s); fix it or leave it out with --probe", sp.Name, rp.Note)
			}
			continue
		}
		path := Path(o.Dir, sp.Name)
		old, err := readIfExists(path)
		if err != nil {
			return nil, err
		}
		nf := FromResults(o.Results, rp)
		if old != nil && !o.Rebase {
			switch {
			case old.Fingerprint.BaseWeights != nf.Fingerprint.BaseWeights:
				return nil, fmt.Errorf("%s was recorded from base weights %.12s…, these results from %.12s…; pass --rebase to approve a new base", path, old.Fingerprint.BaseWeights, nf.Fingerprint.BaseWeights)
			case old.Fingerprint.Suite != nf.Fingerprint.Suite:
				return nil, fmt.Errorf("%s was recorded with another version of the suite (hash %.12s…, now %.12s…); pass --rebase to approve the suite change", path, old.Fingerprint.Suite, nf.Fingerprint.Suite)
			}
		}
		data, err := nf.Encode()
		if err != nil {
			return nil, err
		}
		pf := PlannedFile{Probe: sp.Name, Path: path, New: data}
		if old != nil {
			pf.Old, _ = os.ReadFile(path)
		}
		plan.Files = append(plan.Files, pf)
		sum := sha256.Sum256(data)
		ep := EntryProbe{Probe: sp.Name, SHA256: hex.EncodeToString(sum[:])}
		for _, t := range sp.Gate {
			nm := rp.Metric(t.Metric)
			if nm == nil {
				continue
			}
			ov := "new"
			if old != nil {
				if om := old.Metric(t.Metric); om != nil {
					ov = ff(om.Value)
				}
			}
			ep.Values = append(ep.Values, fmt.Sprintf("%s %s -> %s", t.Metric, ov, ff(nm.Value)))
		}
		plan.Entry.Probes = append(plan.Entry.Probes, ep)
	}
	if len(plan.Files) == 0 {
		return nil, errors.New("nothing to record: no selected probe ran")
	}
	return plan, nil
}

// Apply writes the plan as one transaction. It takes the directory's lock
// (a second update waits for nothing: it fails with a clear message), checks
// that the files are still those the plan was made from, writes every new
// golden file and the extended approval log to temporary files and syncs
// them, records the renames in a journal (PendingFile), renames everything
// into place, syncs the directory and removes the journal. A crash before the
// journal exists leaves the old files (and stray temporaries that the next
// operation removes); a crash after it is rolled forward by the next update,
// compare or verify, so readers only ever see the complete old files or the
// complete new ones.
func (p *Plan) Apply() (err error) {
	if err := os.MkdirAll(p.dir, 0o755); err != nil {
		return fmt.Errorf("making golden directory: %w", err)
	}
	unlock, err := lock(p.dir)
	if err != nil {
		return err
	}
	defer unlock()
	if err := recoverLocked(p.dir); err != nil {
		return err
	}
	for _, f := range p.Files {
		cur, err := os.ReadFile(f.Path)
		if err != nil && !os.IsNotExist(err) {
			return fmt.Errorf("reading %s: %w", f.Path, err)
		}
		if (err == nil) != (f.Old != nil) || string(cur) != string(f.Old) {
			return fmt.Errorf("%s changed since this update was planned (another update?); run the update again", f.Path)
		}
	}
	var ready []renaming
	defer func() {
		if err != nil {
			for _, s := range ready {
				os.Remove(s.tmp)
			}
		}
	}()
	stage := func(dst string, data []byte) error {
		f, err := os.CreateTemp(filepath.Dir(dst), tempPrefix+"*")
		if err != nil {
			return fmt.Errorf("writing %s: %w", dst, err)
		}
		ready = append(ready, renaming{f.Name(), dst})
		if _, err := f.Write(data); err != nil {
			f.Close()
			return fmt.Errorf("writing %s: %w", dst, err)
		}
		if err := f.Sync(); err != nil {
			f.Close()
			return fmt.Errorf("syncing %s: %w", dst, err)
		}
		if err := f.Close(); err != nil {
			return fmt.Errorf("writing %s: %w", dst, err)
		}
		return os.Chmod(f.Name(), 0o644)
	}
	for _, f := range p.Files {
		if err := stage(f.Path, f.New); err != nil {
			return err
		}
	}
	logPath := filepath.Join(p.dir, LogFile)
	oldLog, err := os.ReadFile(logPath)
	if err != nil && !os.IsNotExist(err) {
		return fmt.Errorf("reading approval log: %w", err)
	}
	if err := stage(logPath, append(oldLog, []byte(p.Entry.encode())...)); err != nil {
		return err
	}
	if err := writeJournal(p.dir, ready); err != nil {
		return err
	}
	// From here the update is committed: a crash is rolled forward.
	ready = nil
	return recoverLocked(p.dir)
}
