// Package golden keeps the memory of what an approved build did: one text
// file per probe under a golden directory per suite, the tolerance-aware
// comparison of new Results against them (producing a Verdict), and the
// audited update step with its approval log.
package golden
