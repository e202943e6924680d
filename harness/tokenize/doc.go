// Package tokenize implements the byte-level BPE tokenizer used by open
// decoder-only checkpoints (the GPT-2 scheme): every byte of the input is
// mapped to a printable character by the standard byte↔unicode table, the
// text is cut into chunks by the GPT-2 pre-tokenizer pattern
//
//	's|'t|'re|'ve|'m|'ll|'d| ?\p{L}+| ?\p{N}+| ?[^\s\p{L}\p{N}]+|\s+(?!\S)|\s+
//
// (implemented by hand, because Go's regexp has no lookahead), and the BPE
// merges are applied by rank inside each chunk.
//
// # Classes used by the pre-tokenizer
//
// \p{L} and \p{N} are Go's unicode.L and unicode.N tables (Unicode
// 15.0.0 in this toolchain); \s is the Unicode White_Space property
// (unicode.IsSpace), which includes U+0085 and excludes U+FEFF. Input need
// not be valid UTF-8: each byte that does not start a valid UTF-8 sequence
// is treated as a single character that is neither a letter, a digit nor a
// space, so it joins runs of punctuation; its byte is still encoded exactly,
// and Decode(Encode(s)) == s for every byte string s when the pre-tokenizer
// does not add a prefix space.
//
// # Loading
//
// LoadDir reads tokenizer.json when the directory has one (vocab.json and
// merges.txt are then ignored), otherwise vocab.json + merges.txt. The
// optional tokenizer_config.json and special_tokens_map.json name the BOS,
// EOS, PAD and UNK tokens; for each name tokenizer_config.json wins and
// special_tokens_map.json only fills in names the former does not give.
// In the two-file layout tokenizer_config.json's add_prefix_space and
// added_tokens_decoder are read too; with tokenizer.json its own
// pre_tokenizer and added_tokens govern and those fields are ignored.
//
// The vocabulary's ids must be exactly 0..n-1 and hold all 256 one-byte
// symbols; every merge's two symbols and its result must be vocabulary
// entries, and a merge may not repeat. Added tokens may reuse a vocabulary
// id or extend past it. Only the supported parts of tokenizer.json load:
// a null normalizer, a ByteLevel pre-tokenizer (use_regex false makes each
// text segment one chunk), a BPE model without dropout or affixes
// (ignore_merges is honoured), a ByteLevel or null decoder. Anything else
// is an error naming the file and the field.
//
// When a TemplateProcessing post-processor governs and no configuration
// file names a BOS (EOS), BOS() (EOS()) reports the template's first
// prepended (last appended) token.
//
// Decode concatenates the tokens' bytes; when the pre-tokenizer adds a
// prefix space, that space is part of the decoded text.
//
// # Which special tokens the model sees (EncodeForModel)
//
//   - tokenizer.json with a non-null "post_processor": the post-processor
//     governs. ByteLevel adds nothing; TemplateProcessing adds the
//     SpecialToken entries of its "single" template before and after the
//     text; a Sequence of those is accepted. add_bos_token/add_eos_token in
//     tokenizer_config.json are then ignored, even if they disagree.
//   - tokenizer.json with a null or absent "post_processor", or the
//     vocab.json + merges.txt layout: tokenizer_config.json's add_bos_token
//     prepends the BOS id and add_eos_token appends the EOS id.
//   - neither: nothing is added.
//
// # Special tokens inside the text
//
// By default text is data: an added or special token that appears literally
// in the input is tokenized like any other text. EncodeWith with
// EncodeOptions.ParseSpecials set recognises every added token's content
// (leftmost, longest match first) and emits its id instead; the
// single_word, lstrip and rstrip flags of added tokens are not applied.
//
// # Concurrency
//
// A Tokenizer is immutable after LoadDir or Train except for its chunk
// cache, which is guarded by a mutex: all methods are safe for concurrent
// use, and outputs never depend on the cache or on the thread count.
package tokenize
