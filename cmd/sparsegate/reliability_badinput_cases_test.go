package main_test

// The bad-input catalogue: every case is one command line of the real binary
// on one damaged or hostile input, with the exit code and message it must
// give. BAD_INPUTS.md documents the same cases (TestBadInputsDocumented keeps
// the two in step).

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// badCase is one entry of the catalogue.
type badCase struct {
	id    string
	setup func(t *testing.T, f *relFixture, dir string) []string // builds the input in dir, returns the arguments
	code  int                                                    // the exit code; anyNonZero for "fails, code not fixed"
	msgs  []string                                               // substrings stderr must hold
	out   []string                                               // substrings stdout must hold
	// absent are paths (relative to dir) the command must not create; every
	// other path under dir must be unchanged too, except created.
	absent, created []string
	maxRSSMiB       int64  // when > 0, the child's peak memory bound
	skip            string // known bug: the case is kept but skipped
	// skipIf, when set, returns a reason to skip on this machine ("" to run).
	skipIf func(t *testing.T, dir string) string
	env    []string
}

// anyNonZero marks a case whose exit code only has to be non-zero.
const anyNonZero = -1

// copyModel copies the demo model into dir/name and returns name.
func copyModel(t *testing.T, f *relFixture, dir, name string) string {
	t.Helper()
	copyTree(t, f.model, filepath.Join(dir, name))
	return name
}

// replaceOnce replaces the first occurrence of old in a file with new, which
// must have the same length (so safetensors offsets stay valid).
func replaceOnce(t *testing.T, path, old, repl string) {
	t.Helper()
	if len(old) != len(repl) {
		t.Fatalf("replaceOnce: %q and %q differ in length", old, repl)
	}
	b := readBytes(t, path)
	i := bytes.Index(b, []byte(old))
	if i < 0 {
		t.Fatalf("%s does not contain %q", path, old)
	}
	copy(b[i:], repl)
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// pokeData overwrites bytes of a safetensors file's data buffer at offset.
func pokeData(t *testing.T, path string, offset int, data []byte) {
	t.Helper()
	b := readBytes(t, path)
	start := 8 + int(binary.LittleEndian.Uint64(b[:8]))
	copy(b[start+offset:], data)
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// editFile applies fn to a file's text.
func editFile(t *testing.T, path string, fn func(string) string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(fn(string(readBytes(t, path)))), 0o644); err != nil {
		t.Fatal(err)
	}
}

// writeFile writes a file, creating its directory.
func writeFile(t *testing.T, path string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

// suiteCase writes a suite (with the fixture data beside it) into dir/s and
// returns the arguments that run it on the demo base, writing results into
// out/ (which must stay absent).
func suiteCase(yaml string) func(t *testing.T, f *relFixture, dir string) []string {
	return func(t *testing.T, f *relFixture, dir string) []string {
		if err := writeSuiteDir(filepath.Join(dir, "s"), yaml); err != nil {
			t.Fatal(err)
		}
		return []string{"run", "--suite", "s/suite.yaml", "--base", f.model, "--no-cache", "--results", "out/r.json"}
	}
}

// suiteHead starts a one-probe suite of format 1.
const suiteHead = "format: 1\nname: bad\nprobes:\n"

// pplProbe is a valid perplexity probe entry.
const pplProbe = "  - name: p\n    kind: perplexity\n    text: data/heldout.txt\n"

// itemsCase runs a choice probe over the given item file (and the fixture
// pool) with the given number of shots.
func itemsCase(items []byte, shots int) func(t *testing.T, f *relFixture, dir string) []string {
	return func(t *testing.T, f *relFixture, dir string) []string {
		yaml := fmt.Sprintf("%s  - name: mc\n    kind: choice\n    items: data/items.jsonl\n    pool: data/pool.jsonl\n    shots: %d\n", suiteHead, shots)
		args := suiteCase(yaml)(t, f, dir)
		writeFile(t, filepath.Join(dir, "s", "data", "items.jsonl"), items)
		return args
	}
}

// goodItem is a valid choice item line.
const goodItem = `{"id":"a","context":"Status: on time","options":[" a"," b"],"answer":0}` + "\n"

// manifestCase writes a build whose layer 0 MLP rule is rule (the other
// units dense) and returns the arguments that inspect it; hash "" is the
// demo model's real hash.
func manifestCase(rule, hash, predictors string) func(t *testing.T, f *relFixture, dir string) []string {
	return func(t *testing.T, f *relFixture, dir string) []string {
		if hash == "" {
			hash = f.hash
		}
		layers := []string{fmt.Sprintf(`{"layer":0,"mlp":%s,"attention":{"mode":"dense"}}`, rule)}
		for l := 1; l < relDemoLayers; l++ {
			layers = append(layers, fmt.Sprintf(`{"layer":%d,"mlp":{"mode":"dense"},"attention":{"mode":"dense"}}`, l))
		}
		if err := writeRawManifest(filepath.Join(dir, "build"), f.model, hash, predictors, strings.Join(layers, ",\n")); err != nil {
			t.Fatal(err)
		}
		return []string{"inspect", "build"}
	}
}

// goldenCopy copies the fixture's golden directory into dir/g.
func goldenCopy(t *testing.T, f *relFixture, dir string) string {
	t.Helper()
	copyTree(t, f.golden, filepath.Join(dir, "g"))
	return "g"
}

// compareArgs compares the fixture's candidate results with dir/g.
func compareArgs(f *relFixture) []string {
	return []string{"compare", "--suite", f.suite, "--results", f.candRes, "--golden", "g", "--junit", "out/j.xml"}
}

// verdictCase writes a damaged verdict (edit applied to the fixture's) and
// re-renders it.
func verdictCase(edit func(string) string) func(t *testing.T, f *relFixture, dir string) []string {
	return func(t *testing.T, f *relFixture, dir string) []string {
		writeFile(t, filepath.Join(dir, "v.json"), []byte(edit(string(readBytes(t, f.verdict)))))
		return []string{"report", "--verdict", "v.json", "--junit", "out/j.xml", "--html", "out/r.html"}
	}
}

// resultsFile writes damaged results (edit applied to the fixture's
// candidate results) to dir/r.json.
func resultsFile(t *testing.T, f *relFixture, dir string, edit func(string) string) string {
	t.Helper()
	writeFile(t, filepath.Join(dir, "r.json"), []byte(edit(string(readBytes(t, f.candRes)))))
	return "r.json"
}

func truncateHalf(s string) string { return s[:len(s)/2] }

func schemaTo(n int) func(string) string {
	return func(s string) string { return strings.Replace(s, `"schema": 1`, fmt.Sprintf(`"schema": %d`, n), 1) }
}

// badCases is the catalogue.
func badCases() []badCase {
	model := func(t *testing.T, f *relFixture, dir string) string { return copyModel(t, f, dir, "m") }
	inspectModel := func(edit func(t *testing.T, dir string)) func(t *testing.T, f *relFixture, dir string) []string {
		return func(t *testing.T, f *relFixture, dir string) []string {
			edit(t, filepath.Join(dir, model(t, f, dir)))
			return []string{"inspect", "m"}
		}
	}
	st := func(dir string) string { return filepath.Join(dir, "model.safetensors") }
	cfg := func(dir string) string { return filepath.Join(dir, "config.json") }
	return []badCase{
		// Checkpoints.
		{id: "ckpt-truncated", code: 2, msgs: []string{"m/model.safetensors", "run past the end", "truncated"},
			setup: inspectModel(func(t *testing.T, d string) {
				if err := os.Truncate(st(d), 1_000_000); err != nil {
					t.Fatal(err)
				}
			})},
		{id: "ckpt-header-10GB", code: 2, msgs: []string{"header length 10000000000 exceeds"},
			setup: inspectModel(func(t *testing.T, d string) {
				b := readBytes(t, st(d))
				binary.LittleEndian.PutUint64(b[:8], 10_000_000_000)
				writeFile(t, st(d), b)
			})},
		{id: "ckpt-int-dtype", code: 2, msgs: []string{`"model.decoder.embed_tokens.weight" has dtype I16`, "F32, F16 or BF16"},
			setup: inspectModel(func(t *testing.T, d string) {
				replaceOnce(t, st(d), `"dtype":"F16","shape":[2048,128]`, `"dtype":"I16","shape":[2048,128]`)
			})},
		{id: "ckpt-unknown-dtype", code: 2, msgs: []string{`unknown dtype "X16"`, "file offset"},
			setup: inspectModel(func(t *testing.T, d string) {
				replaceOnce(t, st(d), `"dtype":"F16","shape":[2048,128]`, `"dtype":"X16","shape":[2048,128]`)
			})},
		{id: "ckpt-wrong-shape", code: 2, msgs: []string{"has shape [1024 256] but config.json implies [2048 128]"},
			setup: inspectModel(func(t *testing.T, d string) {
				replaceOnce(t, st(d), `"shape":[2048,128]`, `"shape":[1024,256]`)
			})},
		{id: "ckpt-nan-weights", code: 2, msgs: []string{"1 tensors hold NaN or Inf", "re-export"},
			setup: inspectModel(func(t *testing.T, d string) { pokeData(t, st(d), 100, []byte{0x00, 0x7e}) })}, // F16 NaN 0x7e00
		{id: "ckpt-inf-weights", code: 2, msgs: []string{"1 tensors hold NaN or Inf"},
			setup: inspectModel(func(t *testing.T, d string) { pokeData(t, st(d), 4000, []byte{0x00, 0xfc}) })}, // F16 −Inf 0xfc00
		{id: "config-unknown-family", code: 2, msgs: []string{"m/config.json", `unsupported architecture "bloom"`, "supported: opt, gpt2, llama"},
			setup: inspectModel(func(t *testing.T, d string) {
				editFile(t, cfg(d), func(s string) string { return strings.Replace(s, `"opt"`, `"bloom"`, 1) })
			})},
		{id: "config-missing-field", code: 2, msgs: []string{"m/config.json", `field "ffn_dim" is missing`},
			setup: inspectModel(func(t *testing.T, d string) {
				editFile(t, cfg(d), func(s string) string { return strings.Replace(s, `"ffn_dim": 512,`, "", 1) })
			})},
		{id: "config-duplicate-key", code: 2, msgs: []string{"m/config.json", "activation_function", "twice"},
			setup: inspectModel(func(t *testing.T, d string) {
				editFile(t, cfg(d), func(s string) string {
					return strings.Replace(s, `"activation_function": "relu",`, `"activation_function": "relu", "activation_function": "gelu",`, 1)
				})
			})},
		{id: "config-syntax-error", code: 2, msgs: []string{"m/config.json", "invalid JSON"},
			setup: inspectModel(func(t *testing.T, d string) { editFile(t, cfg(d), func(s string) string { return s[:len(s)/2] }) })},
		{id: "config-not-object", code: 2, msgs: []string{"m/config.json", "must hold a JSON object"},
			setup: inspectModel(func(t *testing.T, d string) { writeFile(t, cfg(d), []byte("[1, 2, 3]\n")) })},

		// Tokenizers.
		{id: "tokenizer-json-truncated", code: 2, msgs: []string{"m/tokenizer.json", "byte offset 40000", "truncated"},
			setup: inspectModel(func(t *testing.T, d string) {
				if err := os.Truncate(filepath.Join(d, "tokenizer.json"), 40000); err != nil {
					t.Fatal(err)
				}
			})},
		{id: "merges-invalid-utf8", code: 2, msgs: []string{"m/merges.txt", "line 3", `"\xff\xfe"`, "not in the vocabulary"},
			setup: inspectModel(func(t *testing.T, d string) { twoFileTokenizer(t, d, "\xff\xfe") })},
		{id: "tokenizer-missing", code: 2, absent: []string{"out"}, msgs: []string{`probe "ppl": the model in m has no tokenizer`},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				if err := os.Remove(filepath.Join(dir, model(t, f, dir), "tokenizer.json")); err != nil {
					t.Fatal(err)
				}
				return []string{"run", "--suite", f.suite, "--base", "m", "--no-cache", "--results", "out/r.json"}
			}},

		// Suites.
		{id: "suite-unknown-field", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:7:5", `unknown field "windw" (did you mean "window"?)`},
			setup: suiteCase(suiteHead + pplProbe + "    windw: 128\n")},
		{id: "suite-wrong-type", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:7:13", `window must be a whole number, not "128"`},
			setup: suiteCase(suiteHead + pplProbe + "    window: \"128\"\n")},
		{id: "suite-alias-bomb", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:3:", "anchors and aliases"},
			setup: suiteCase("format: 1\nname: bad\nabout: &a [*a, *a]\nprobes:\n" + pplProbe)},
		{id: "suite-alias-reuse", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:4:5", "anchors and aliases"},
			setup: suiteCase(suiteHead + "  - &p {name: p, kind: perplexity, text: data/heldout.txt}\n  - *p\n")},
		{id: "suite-deep-nesting", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:3:", "nesting deeper than 32 levels"},
			setup: suiteCase("format: 1\nname: bad\nabout: " + strings.Repeat("[", 100) + strings.Repeat("]", 100) + "\nprobes:\n" + pplProbe)},
		{id: "suite-duplicate-probe", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:7:5", `probe "p" is defined twice (first at line 4)`},
			setup: suiteCase(suiteHead + pplProbe + pplProbe)},
		{id: "suite-dotdot-path", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:6:11", "leaves the suite's directory"},
			setup: suiteCase(suiteHead + "  - name: p\n    kind: perplexity\n    text: ../s/data/heldout.txt\n")},
		{id: "suite-absolute-path", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:6:11", "is absolute"},
			setup: suiteCase(suiteHead + "  - name: p\n    kind: perplexity\n    text: /etc/hostname\n")},
		{id: "suite-symlink-escape", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:6:11", "outside the suite's directory"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				args := suiteCase(suiteHead+"  - name: p\n    kind: perplexity\n    text: data/link.txt\n")(t, f, dir)
				writeFile(t, filepath.Join(dir, "outside.txt"), []byte("text outside the suite's directory\n"))
				if err := os.Symlink(filepath.Join(dir, "outside.txt"), filepath.Join(dir, "s", "data", "link.txt")); err != nil {
					t.Fatal(err)
				}
				return args
			}},
		{id: "suite-invalid-utf8", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:3:", "not valid UTF-8 (byte offset 28)"},
			setup: suiteCase("format: 1\nname: bad\nabout: \"\xff\xfe\"\nprobes:\n" + pplProbe)},
		{id: "suite-format-2", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:1:9", "format 2 is not supported", "newer sparsegate"},
			setup: suiteCase("format: 2\nname: bad\nprobes:\n" + pplProbe)},
		{id: "suite-second-document", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml:7:1", "second YAML document"},
			setup: suiteCase(suiteHead + pplProbe + "---\nformat: 1\n")},
		{id: "suite-over-1MiB", code: 2, absent: []string{"out"}, msgs: []string{"s/suite.yaml", "more than the 1048576"},
			setup: suiteCase(suiteHead + pplProbe + strings.Repeat("# padding\n", 110_000))},

		// Item files.
		{id: "items-malformed-line", code: 2, absent: []string{"out"}, msgs: []string{"data/items.jsonl:2", "not valid JSON"},
			setup: itemsCase([]byte(goodItem+`{"id":"b","context":"x","options":[" a"," b"],"answer":1`+"\n"), 0)},
		{id: "items-answer-out-of-range", code: 2, absent: []string{"out"}, msgs: []string{"data/items.jsonl:2", "answer 2 is out of range"},
			setup: itemsCase([]byte(goodItem+`{"id":"b","context":"x","options":[" a"," b"],"answer":2}`+"\n"), 0)},
		{id: "items-1GB-line", code: 2, absent: []string{"out"}, msgs: []string{"data/items.jsonl:1", "longer than 1048576 bytes"}, maxRSSMiB: 256,
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				args := itemsCase([]byte("{"), 0)(t, f, dir)
				if err := os.Truncate(filepath.Join(dir, "s", "data", "items.jsonl"), 1<<30); err != nil {
					t.Fatal(err)
				}
				return args
			}},
		{id: "items-invalid-utf8", code: 2, absent: []string{"out"}, msgs: []string{"data/items.jsonl:1", "byte 22 of the line is not valid UTF-8"},
			setup: itemsCase([]byte("{\"id\":\"a\",\"context\":\"\xff\",\"options\":[\" a\",\" b\"],\"answer\":0}\n"), 0)},
		{id: "items-duplicate-id", code: 2, absent: []string{"out"}, msgs: []string{"data/items.jsonl:2", `id "a" was already used on line 1`},
			setup: itemsCase([]byte(goodItem+goodItem), 0)},
		{id: "items-shots-over-pool", code: 2, absent: []string{"out"}, msgs: []string{"64 shots", "has only 20 examples"},
			setup: itemsCase([]byte(goodItem), 64)},
		{id: "items-unknown-field", code: 2, absent: []string{"out"}, msgs: []string{"data/items.jsonl:1", `unknown field "extra"`},
			setup: itemsCase([]byte(`{"id":"a","context":"x","options":[" a"," b"],"answer":0,"extra":1}`+"\n"), 0)},
		{id: "items-empty-file", code: 2, absent: []string{"out"}, msgs: []string{"data/items.jsonl: no items"},
			setup: itemsCase(nil, 0)},

		// Sparse build manifests.
		{id: "manifest-base-hash-mismatch", code: 2, msgs: []string{"build/manifest.json", "have sha256 ", "but the manifest records " + strings.Repeat("0", 64)},
			setup: manifestCase(`{"mode":"dense"}`, strings.Repeat("0", 64), "")},
		{id: "manifest-k-out-of-range", code: 2, msgs: []string{"build/manifest.json", "layer 0 mlp: k 513 is out of range", "between 1 and 512"},
			setup: manifestCase(`{"mode":"oracle","k":513}`, "", "")},
		{id: "manifest-k-zero", code: 2, msgs: []string{"layer 0 mlp: k 0 is out of range"},
			setup: manifestCase(`{"mode":"oracle","k":0}`, "", "")},
		{id: "manifest-missing-predictors", code: 2, msgs: []string{"predictors.safetensors does not exist"},
			setup: manifestCase(`{"mode":"predictor","k":64,"rank":16,"input":"self"}`, "", "predictors.safetensors")},
		{id: "manifest-unknown-rule", code: 2, msgs: []string{`mode "magic" is unknown`, "dense, oracle, threshold, predictor, static"},
			setup: manifestCase(`{"mode":"magic","k":64}`, "", "")},
		{id: "manifest-version-2", code: 2, msgs: []string{"format version 2 was written by a newer sparsegate"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				args := manifestCase(`{"mode":"dense"}`, "", "")(t, f, dir)
				editFile(t, filepath.Join(dir, "build", "manifest.json"), func(s string) string { return strings.Replace(s, `"version": 1`, `"version": 2`, 1) })
				return args
			}},

		// Golden directories.
		{id: "golden-hand-edited-value", code: 1, msgs: []string{"g: 1 problems"}, out: []string{"g/ppl.golden: its content differs from what the latest approval recorded"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				g := goldenCopy(t, f, dir)
				editFile(t, filepath.Join(dir, g, "ppl.golden"), func(s string) string {
					i := strings.Index(s, "metric perplexity ")
					j := strings.IndexByte(s[i:], '\n')
					return s[:i] + "metric perplexity 1.5" + s[i+j:]
				})
				return []string{"golden", "verify", "--golden", g, "--suite", f.suite}
			}},
		{id: "golden-hand-edited-garbage", code: 2, absent: []string{"out"}, msgs: []string{"g/ppl.golden:", `metric perplexity: "abc" is not a finite number`, "restore it from version control"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				g := goldenCopy(t, f, dir)
				editFile(t, filepath.Join(dir, g, "ppl.golden"), func(s string) string {
					i := strings.Index(s, "metric perplexity ")
					j := strings.IndexByte(s[i:], '\n')
					return s[:i] + "metric perplexity abc" + s[i+j:]
				})
				return compareArgs(f)
			}},
		{id: "golden-newer-format", code: 2, absent: []string{"out"}, msgs: []string{"g/ppl.golden:1", "golden format 2 was written by a newer sparsegate"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				g := goldenCopy(t, f, dir)
				editFile(t, filepath.Join(dir, g, "ppl.golden"), func(s string) string { return strings.Replace(s, "sparsegate-golden 1", "sparsegate-golden 2", 1) })
				return compareArgs(f)
			}},
		{id: "golden-log-interrupted", code: 2, msgs: []string{"g/APPROVALS.log:", "no 'end' line"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				g := goldenCopy(t, f, dir)
				editFile(t, filepath.Join(dir, g, "APPROVALS.log"), func(s string) string { return s[:strings.LastIndex(s, "end")] })
				return []string{"golden", "verify", "--golden", g}
			}},
		{id: "golden-dir-symlink-compare", code: 2, absent: []string{"out"}, msgs: []string{"golden directory g is a symbolic link"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				copyTree(t, f.golden, filepath.Join(dir, "real"))
				if err := os.Symlink("real", filepath.Join(dir, "g")); err != nil {
					t.Fatal(err)
				}
				return compareArgs(f)
			}},
		{id: "golden-dir-symlink-update", code: 2, msgs: []string{"golden directory g is a symbolic link"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				copyTree(t, f.golden, filepath.Join(dir, "real"))
				if err := os.Symlink("real", filepath.Join(dir, "g")); err != nil {
					t.Fatal(err)
				}
				return []string{"golden", "update", "--suite", f.suite, "--golden", "g", "--from", f.baseRes, "--reason", "r", "--who", "w"}
			}},
		{id: "golden-read-only-update", code: 2, msgs: []string{"g"},
			skipIf: readOnlyIsWritable,
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				g := goldenCopy(t, f, dir)
				if err := os.Chmod(filepath.Join(dir, g), 0o555); err != nil {
					t.Fatal(err)
				}
				t.Cleanup(func() { os.Chmod(filepath.Join(dir, g), 0o755) })
				return []string{"golden", "update", "--suite", f.suite, "--golden", g, "--from", f.baseRes, "--reason", "r", "--who", "w"}
			}},

		// Verdict and results JSON.
		{id: "report-verdict-other-schema", code: 2, absent: []string{"out"}, msgs: []string{"v.json: verdict schema 2; this sparsegate reads schema 1"},
			setup: verdictCase(schemaTo(2))},
		{id: "report-verdict-truncated", code: 2, absent: []string{"out"}, msgs: []string{"v.json: not verdict JSON (truncated or corrupt?)"},
			setup: verdictCase(truncateHalf)},
		{id: "report-results-as-verdict", code: 2, absent: []string{"out"}, msgs: []string{"v.json", "this is a results file"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				writeFile(t, filepath.Join(dir, "v.json"), readBytes(t, f.baseRes))
				return []string{"report", "--verdict", "v.json", "--junit", "out/j.xml"}
			}},
		{id: "compare-results-other-schema", code: 2, absent: []string{"out"}, msgs: []string{"r.json: results schema 7"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"compare", "--suite", f.suite, "--results", resultsFile(t, f, dir, schemaTo(7)), "--golden", f.golden, "--junit", "out/j.xml"}
			}},
		{id: "compare-results-truncated", code: 2, absent: []string{"out"}, msgs: []string{"r.json: not results JSON"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"compare", "--suite", f.suite, "--results", resultsFile(t, f, dir, truncateHalf), "--golden", f.golden, "--junit", "out/j.xml"}
			}},
		{id: "compare-verdict-as-results", code: 2, absent: []string{"out"}, msgs: []string{"r.json", `unknown field "golden_dir"`},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				writeFile(t, filepath.Join(dir, "r.json"), readBytes(t, f.verdict))
				return []string{"compare", "--suite", f.suite, "--results", "r.json", "--golden", f.golden, "--junit", "out/j.xml"}
			}},
		{id: "merge-results-truncated", code: 2, absent: []string{"out"}, msgs: []string{"r.json: not results JSON"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"merge", "--out", "out/m.json", resultsFile(t, f, dir, truncateHalf)}
			}},
		{id: "merge-results-other-schema", code: 2, absent: []string{"out"}, msgs: []string{"r.json: results schema 2"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"merge", "--out", "out/m.json", resultsFile(t, f, dir, schemaTo(2))}
			}},

		// Flags.
		{id: "flag-unknown", code: 2, absent: []string{"out"}, msgs: []string{"run: unknown flag: --bogus", "sparsegate help run"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"run", "--suite", f.suite, "--base", f.model, "--results", "out/r.json", "--bogus"}
			}},
		{id: "flag-shard-5-of-4", code: 2, absent: []string{"out"}, msgs: []string{`--shard "5/4": use I/N with 1 ≤ I ≤ N`},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"run", "--suite", f.suite, "--base", f.model, "--no-cache", "--results", "out/r.json", "--shard", "5/4"}
			}},
		{id: "flag-threads-negative", code: 2, absent: []string{"out"}, msgs: []string{"--threads must not be negative"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"run", "--suite", f.suite, "--base", f.model, "--no-cache", "--results", "out/r.json", "--threads", "-1"}
			}},
		{id: "flag-shard-auto-no-env", code: 2, absent: []string{"out"}, msgs: []string{"--shard auto: no shard in the environment", "SPARSEGATE_SHARD_INDEX"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"run", "--suite", f.suite, "--base", f.model, "--no-cache", "--results", "out/r.json", "--shard", "auto"}
			}},

		// Outputs.
		{id: "report-into-missing-dir", code: 0, created: []string{"new", "new/deeper", "new/deeper/j.xml", "new/r.html"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"report", "--verdict", f.verdict, "--junit", "new/deeper/j.xml", "--html", "new/r.html"}
			}},
		{id: "results-into-missing-dir", code: 0, created: []string{"new", "new/deeper", "new/deeper/r.json"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"run", "--suite", f.suite, "--base", f.model, "--no-cache", "--results", "new/deeper/r.json"}
			}},
		{id: "report-to-full-device", code: anyNonZero, msgs: []string{"full"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"report", "--verdict", f.verdict, "--junit", fullDevice(t, dir)}
			}},
		{id: "results-to-full-device", code: anyNonZero, msgs: []string{"full"},
			setup: func(t *testing.T, f *relFixture, dir string) []string {
				return []string{"run", "--suite", f.suite, "--base", f.model, "--no-cache", "--results", fullDevice(t, dir)}
			}},
	}
}
