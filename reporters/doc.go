// Package reporters renders a golden.Verdict for the people and machines that
// act on it: JUnit XML for CI, a textual diff of what degraded for the
// engineer, and Markdown and HTML summaries for the reviewer, plus the
// verdict itself as JSON.
//
// # Determinism
//
// Every reporter writes the same bytes for the same verdict: nothing depends
// on the clock, the environment or map iteration order, and numbers are
// printed with a fixed precision. The only colour decision is the Diff
// reporter's Color field, which callers take from ColorFor.
//
// # Untrusted text
//
// Probe names, notes and generated texts come from suite files and models.
// Before they reach a terminal, an XML file or a page, control characters and
// invalid UTF-8 are replaced by visible escapes such as \x01 and \xff, and
// the text is escaped for the output format.
package reporters
