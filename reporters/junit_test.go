package reporters

import (
	"bytes"
	"encoding/xml"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	// An independent JUnit reader: github.com/joshdk/go-junit v1.0.0.
	junit "github.com/joshdk/go-junit"

	"sparsegate/golden"
)

// parseJUnit reads JUnit XML with go-junit v1.0.0, a reader that shares no
// code with the writer.
func parseJUnit(t *testing.T, data []byte) []junit.Suite {
	t.Helper()
	suites, err := junit.Ingest(data)
	if err != nil {
		t.Fatalf("go-junit v1.0.0 cannot read the report: %v\n%s", err, data)
	}
	return suites
}

// wellFormed checks data with encoding/xml: every token decodes and the
// elements nest.
func wellFormed(t *testing.T, data []byte) {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(data))
	for {
		_, err := dec.Token()
		if err == io.EOF {
			return
		}
		if err != nil {
			t.Fatalf("encoding/xml: %v", err)
		}
	}
}

func TestJUnitReadBackByGoJUnit(t *testing.T) {
	v := failingVerdict()
	data := render(t, JUnit{}, v)
	wellFormed(t, data)
	suites := parseJUnit(t, data)
	if len(suites) != len(v.Probes) {
		t.Fatalf("%d test suites, want one per probe (%d)", len(suites), len(v.Probes))
	}
	want := map[string]junit.Totals{
		"lookup-mc":   {Tests: 2, Passed: 1, Failed: 1},
		"weather-gen": {Tests: 2, Passed: 1, Failed: 1},
		"heldout-ppl": {Tests: 2, Passed: 2},
		"sparsity":    {Tests: 2, Passed: 2},
		"speed":       {Tests: 1, Passed: 1}, // base_prefill_tps is not gated: no case
		"drift":       {Tests: 1, Error: 1},
		"flips":       {Tests: 1, Skipped: 1},
		"news-mc":     {Tests: 1, Failed: 1}, // new fails without AllowNew
	}
	for i, s := range suites {
		if s.Name != v.Probes[i].Name {
			t.Errorf("suite %d is %q, want %q", i, s.Name, v.Probes[i].Name)
		}
		got := s.Totals
		got.Duration = 0
		if got != want[s.Name] {
			t.Errorf("suite %s: totals %+v, want %+v", s.Name, got, want[s.Name])
		}
		props := map[string]string{
			"base_weights": "sha256:1111aaaa", "candidate_weights": "sha256:2222bbbb", "manifest": "sha256:3333cccc",
			"suite": "sha256:ab12cd34", "probe": "", "tokenizer": "sha256:4444dddd", "harness": "sparsegate 0.4.0", "shard": "1/1",
		}
		if len(s.Properties) != len(props) {
			t.Errorf("suite %s: properties %v, want %v", s.Name, s.Properties, props)
		}
		for k, val := range props {
			if got, ok := s.Properties[k]; !ok || got != val {
				t.Errorf("suite %s: property %s = %q, want %q", s.Name, k, got, val)
			}
		}
		for _, tc := range s.Tests {
			if tc.Classname != "demo."+s.Name {
				t.Errorf("case %s: classname %q", tc.Name, tc.Classname)
			}
		}
	}

	acc := suites[0].Tests[0]
	if acc.Name != "accuracy" || acc.Status != junit.StatusFailed {
		t.Fatalf("first case %s %s, want accuracy failed", acc.Name, acc.Status)
	}
	wantMsg := "metric accuracy: golden 0.82, candidate 0.775, delta -0.045, tolerance abs 0.02, mcnemar α=0.05, fail if both, p 0.0124"
	if acc.Message != wantMsg {
		t.Errorf("failure message\n%q, want\n%q", acc.Message, wantMsg)
	}
	e, ok := acc.Error.(junit.Error)
	if !ok || e.Type != "regression" {
		t.Fatalf("failure %#v, want type regression", acc.Error)
	}
	var block strings.Builder
	Diff{}.writeBlock(&block, v.Probes[0], false)
	if e.Body != block.String() {
		t.Errorf("failure body is not the probe's diff block:\n%q\nwant\n%q", e.Body, block.String())
	}
	if out := suites[2].Tests[0].SystemOut; !strings.HasPrefix(out, "improved: metric perplexity: golden 18.42, candidate 17.9") {
		t.Errorf("improved case system-out %q", out)
	}
	if m := suites[5].Tests[0].Message; m != v.Probes[5].Note {
		t.Errorf("error message %q, want the probe's note", m)
	}
	if m := suites[6].Tests[0].Message; m != "needs the base build (--base)" {
		t.Errorf("skipped message %q", m)
	}
}

// TestJUnitCountsAddUp checks the count and time attributes by reading them
// with encoding/xml: testsuites totals are the sums of the testsuites', each
// testsuite's tests is its number of testcases, and case times add up to the
// suite's time.
func TestJUnitCountsAddUp(t *testing.T) {
	type tcase struct {
		Time    string    `xml:"time,attr"`
		Failure *struct{} `xml:"failure"`
		Error   *struct{} `xml:"error"`
		Skipped *struct{} `xml:"skipped"`
	}
	type tsuite struct {
		Tests    int     `xml:"tests,attr"`
		Failures int     `xml:"failures,attr"`
		Errors   int     `xml:"errors,attr"`
		Skipped  int     `xml:"skipped,attr"`
		Time     string  `xml:"time,attr"`
		Cases    []tcase `xml:"testcase"`
	}
	type tsuites struct {
		Tests    int      `xml:"tests,attr"`
		Failures int      `xml:"failures,attr"`
		Errors   int      `xml:"errors,attr"`
		Skipped  int      `xml:"skipped,attr"`
		Time     string   `xml:"time,attr"`
		Suites   []tsuite `xml:"testsuite"`
	}
	for _, vc := range verdictCases {
		var doc tsuites
		if err := xml.Unmarshal(render(t, JUnit{}, vc.v()), &doc); err != nil {
			t.Fatal(err)
		}
		ms := func(s string) int64 {
			whole, frac, _ := strings.Cut(s, ".")
			var n int64
			for _, c := range whole + frac {
				n = n*10 + int64(c-'0')
			}
			return n
		}
		var tests, failures, errors, skipped int
		var total int64
		for i, s := range doc.Suites {
			var f, e, sk int
			var caseMs int64
			for _, c := range s.Cases {
				f += bool2int(c.Failure != nil)
				e += bool2int(c.Error != nil)
				sk += bool2int(c.Skipped != nil)
				caseMs += ms(c.Time)
			}
			if s.Tests != len(s.Cases) || s.Failures != f || s.Errors != e || s.Skipped != sk {
				t.Errorf("%s suite %d: attributes %d/%d/%d/%d, cases say %d/%d/%d/%d",
					vc.name, i, s.Tests, s.Failures, s.Errors, s.Skipped, len(s.Cases), f, e, sk)
			}
			if len(s.Cases) > 0 && caseMs != ms(s.Time) {
				t.Errorf("%s suite %d: case times add up to %d ms, suite time %s", vc.name, i, caseMs, s.Time)
			}
			tests, failures, errors, skipped = tests+s.Tests, failures+s.Failures, errors+s.Errors, skipped+s.Skipped
			total += ms(s.Time)
		}
		if doc.Tests != tests || doc.Failures != failures || doc.Errors != errors || doc.Skipped != skipped || ms(doc.Time) != total {
			t.Errorf("%s: testsuites %d/%d/%d/%d %s, sums %d/%d/%d/%d %d ms", vc.name,
				doc.Tests, doc.Failures, doc.Errors, doc.Skipped, doc.Time, tests, failures, errors, skipped, total)
		}
	}
}

func bool2int(b bool) int {
	if b {
		return 1
	}
	return 0
}

// hostileVerdict has generated text with control characters, invalid UTF-8,
// a CDATA end and a closing tag in every field that reaches the XML.
func hostileVerdict() *golden.Verdict {
	bad := "a\x00b\x01c\x1bd\xff\xfee]]>f</failure>g&h\"i'j\rk\ufffe"
	v := failingVerdict()
	v.Suite.Name = "suite" + bad
	v.Fingerprint.Harness = bad
	p := v.Probes[1]
	p.Name = "gen" + bad
	p.Metrics[0].Metric = "exact" + bad
	p.Metrics[0].Tolerance = bad
	p.Changes[0].GoldenText = sp("golden " + bad + "\nline two")
	p.Changes[0].CandidateText = sp("candidate " + bad)
	v.Probes[5].Note = bad
	v.Probes[6].Note = bad
	return v
}

func TestJUnitHostileText(t *testing.T) {
	data := render(t, JUnit{}, hostileVerdict())
	wellFormed(t, data)
	if !utf8.Valid(data) {
		t.Error("output is not valid UTF-8")
	}
	for _, b := range data {
		if b < 0x20 && b != '\n' && b != '\t' {
			t.Fatalf("raw control byte %#x in the output", b)
		}
	}
	// The element must not be closed early by the text, and "]]>" must not
	// appear anywhere (go-junit rejects an unmatched CDATA end).
	if bytes.Contains(data, []byte("]]>")) {
		t.Error(`output contains "]]>"`)
	}
	suites := parseJUnit(t, data)
	gen := suites[1]
	want := `gena\x00b\x01c\x1bd\xff\xfee]]>f</failure>g&h"i'j` + "\r" + `k\ufffe`
	if gen.Name != want {
		t.Errorf("suite name read back as %q, want %q", gen.Name, want)
	}
	if gen.Properties["harness"] != strings.TrimPrefix(want, "gen") {
		t.Errorf("property read back as %q", gen.Properties["harness"])
	}
	e := gen.Tests[0].Error.(junit.Error)
	if !strings.Contains(e.Body, `- golden a\x00b\x01c\x1bd\xff\xfee]]>f</failure>g&h"i'j\x0dk\ufffe`) {
		t.Errorf("failure body lost the escaped text:\n%s", e.Body)
	}
	if !strings.Contains(e.Body, "line two") {
		t.Errorf("failure body was cut at the hostile text:\n%s", e.Body)
	}
	checkXmllint(t, data)
}

func TestJUnitBodyBounded(t *testing.T) {
	v := failingVerdict()
	long := strings.Repeat("é", 10000) // 2 bytes a rune: a cut can land mid-rune
	v.Probes[1].Changes[0].GoldenText = &long
	const maxBody = 1001
	suites := parseJUnit(t, render(t, JUnit{MaxBody: maxBody}, v))
	body := suites[1].Tests[0].Error.(junit.Error).Body
	if len(body) > maxBody {
		t.Errorf("body of %d bytes, bound %d", len(body), maxBody)
	}
	if !utf8.ValidString(body) {
		t.Error("body cut inside a rune")
	}
	var full strings.Builder
	Diff{}.writeBlock(&full, v.Probes[1], false)
	kept := body[:strings.LastIndex(body, "\n… truncated ")]
	if !strings.HasPrefix(full.String(), kept) {
		t.Error("body is not a prefix of the probe's block")
	}
	note := "\n… truncated " + strconv.Itoa(len(full.String())-len(kept)) + " bytes\n"
	if !strings.HasSuffix(body, note) {
		t.Errorf("body ends %q, want %q", body[len(body)-60:], note)
	}
	// The default bound leaves the fixture's bodies whole.
	if b := parseJUnit(t, render(t, JUnit{}, failingVerdict()))[1].Tests[0].Error.(junit.Error).Body; strings.Contains(b, "truncated") {
		t.Error("default MaxBody truncated a small body")
	}
}

// checkXmllint runs xmllint (libxml2, Debian package libxml2-utils) on data
// when it is installed.
func checkXmllint(t *testing.T, data []byte) {
	t.Helper()
	path, err := exec.LookPath("xmllint")
	if err != nil {
		missingReference(t, "xmllint not found; install it with: apt-get install libxml2-utils")
		return
	}
	file := filepath.Join(t.TempDir(), "report.xml")
	if err := os.WriteFile(file, data, 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := exec.Command(path, "--noout", file).CombinedOutput(); err != nil {
		t.Errorf("xmllint --noout: %v\n%s", err, out)
	}
}

func TestJUnitXmllint(t *testing.T) {
	for _, vc := range verdictCases {
		checkXmllint(t, render(t, JUnit{}, vc.v()))
	}
}

// missingReference skips a check whose outside reference is not installed,
// or fails it when SPARSEGATE_REQUIRE_REFERENCE=1.
func missingReference(t *testing.T, why string) {
	t.Helper()
	if os.Getenv("SPARSEGATE_REQUIRE_REFERENCE") == "1" {
		t.Fatal(why + " (SPARSEGATE_REQUIRE_REFERENCE=1)")
	}
	t.Skip(why)
}

func TestJUnitProbeFailingWithoutFailingMetric(t *testing.T) {
	v := passingVerdict()
	v.Passed, v.Outcome = false, golden.Fail
	v.Probes[0].Outcome = golden.Fail
	v.Probes[0].Note = "fingerprint changed: harness 0.3.9 → 0.4.0"
	suites := parseJUnit(t, render(t, JUnit{}, v))
	if suites[0].Totals.Failed != 1 {
		t.Fatalf("a failing probe with passing metrics gives %+v, want one failure", suites[0].Totals)
	}
	last := suites[0].Tests[len(suites[0].Tests)-1]
	if last.Name != "probe" || !strings.Contains(last.Message, "fingerprint changed") {
		t.Errorf("guard case %q %q", last.Name, last.Message)
	}
}

func TestJUnitAllowNew(t *testing.T) {
	v := failingVerdict()
	v.AllowNew = true
	suites := parseJUnit(t, render(t, JUnit{}, v))
	news := suites[7]
	if news.Totals.Failed != 0 || news.Totals.Passed != 1 {
		t.Errorf("new metric with AllowNew: %+v, want a pass", news.Totals)
	}
	if !strings.HasPrefix(news.Tests[0].SystemOut, "new (allowed): metric accuracy") {
		t.Errorf("system-out %q", news.Tests[0].SystemOut)
	}
}
