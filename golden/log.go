package golden

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"
)

// LogFile is the approval log's name inside a golden directory.
const LogFile = "APPROVALS.log"

// An Entry is one approved golden update.
//
// # Log format
//
// The log is UTF-8 text, entries appended in time order, each:
//
//	approval 2026-12-02T01:23:45Z
//	who "release-bot"
//	reason "rc7 approved after review of the lookup regression"
//	fingerprint base_weights 5d41…        (the build's, as in golden files)
//	probe "lookup-mc" sha256 9f2c… accuracy 0.9 -> 0.95
//	probe "heldout-ppl" sha256 03aa… perplexity new -> 3.6388
//	end
//
// Each probe line records the SHA-256 of the golden file it wrote and the
// old and new values of its gated metrics, so 'golden verify' can tell that
// the files are the ones approved.
type Entry struct {
	Time        time.Time
	Who, Reason string
	Fingerprint Fingerprint
	Probes      []EntryProbe
}

// An EntryProbe is one golden file an entry wrote.
type EntryProbe struct {
	Probe  string
	SHA256 string
	// Values are "metric old -> new" strings, old "new" for a first record.
	Values []string
}

func (e *Entry) encode() string {
	var b strings.Builder
	fmt.Fprintf(&b, "approval %s\nwho %s\nreason %s\n", e.Time.UTC().Format(time.RFC3339), strconv.Quote(e.Who), strconv.Quote(e.Reason))
	fp := e.Fingerprint
	for _, kv := range [][2]string{{"base_weights", fp.BaseWeights}, {"candidate_weights", fp.CandidateWeights}, {"manifest", fp.Manifest},
		{"suite", fp.Suite}, {"tokenizer", fp.Tokenizer}} {
		if kv[1] != "" {
			fmt.Fprintf(&b, "fingerprint %s %s\n", kv[0], kv[1])
		}
	}
	fmt.Fprintf(&b, "fingerprint harness %s\n", strconv.Quote(fp.Harness))
	for _, p := range e.Probes {
		fmt.Fprintf(&b, "probe %s sha256 %s", strconv.Quote(p.Probe), p.SHA256)
		for _, v := range p.Values {
			b.WriteString(" " + v)
		}
		b.WriteByte('\n')
	}
	b.WriteString("end\n")
	return b.String()
}

// ReadLog parses the approval log of dir (no log: no entries).
func ReadLog(dir string) ([]Entry, error) {
	path := filepath.Join(dir, LogFile)
	data, err := os.ReadFile(path)
	if os.IsNotExist(err) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("reading approval log: %w", err)
	}
	return parseLog(path, data)
}

func parseLog(path string, data []byte) ([]Entry, error) {
	var out []Entry
	var cur *Entry
	sc := bufio.NewScanner(bytes.NewReader(data))
	sc.Buffer(make([]byte, 64<<10), 16<<20)
	line := 0
	fail := func(format string, args ...any) error {
		return fmt.Errorf("%s:%d: %s; the approval log is damaged or hand-edited: restore it from version control", path, line, fmt.Sprintf(format, args...))
	}
	for sc.Scan() {
		line++
		key, rest, _ := strings.Cut(sc.Text(), " ")
		if cur == nil {
			if key != "approval" {
				return nil, fail("expected an 'approval TIME' line")
			}
			t, err := time.Parse(time.RFC3339, rest)
			if err != nil {
				return nil, fail("bad time %q", rest)
			}
			cur = &Entry{Time: t}
			continue
		}
		switch key {
		case "who", "reason":
			s, err := strconv.Unquote(rest)
			if err != nil {
				return nil, fail("%s must be a quoted string", key)
			}
			if key == "who" {
				cur.Who = s
			} else {
				cur.Reason = s
			}
		case "fingerprint":
			f := File{Fingerprint: cur.Fingerprint}
			if err := f.parseFingerprint(rest); err != nil {
				return nil, fail("%v", err)
			}
			cur.Fingerprint = f.Fingerprint
		case "probe":
			name, tail, err := quotedPrefix(rest)
			if err != nil {
				return nil, fail("probe: %v", err)
			}
			parts := strings.Fields(tail)
			if len(parts) < 2 || parts[0] != "sha256" || !isHex(parts[1]) {
				return nil, fail("probe %q: expected 'sha256 HEX'", name)
			}
			ep := EntryProbe{Probe: name, SHA256: parts[1]}
			rest := parts[2:]
			for len(rest) >= 4 && rest[2] == "->" {
				ep.Values = append(ep.Values, strings.Join(rest[:4], " "))
				rest = rest[4:]
			}
			if len(rest) > 0 {
				return nil, fail("probe %q: values must be 'metric old -> new'", name)
			}
			cur.Probes = append(cur.Probes, ep)
		case "end":
			if cur.Reason == "" {
				return nil, fail("an entry without a reason")
			}
			out = append(out, *cur)
			cur = nil
		default:
			return nil, fail("unknown line %q", key)
		}
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	if cur != nil {
		line++
		return nil, fail("the last entry has no 'end' line (an interrupted write?)")
	}
	return out, nil
}
