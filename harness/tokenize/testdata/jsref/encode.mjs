// Reference encoder for TestEncodeMatchesJSReference (harness/tokenize).
// Uses @huggingface/tokenizers 0.2.0, a pure-JavaScript implementation of
// the tokenizer.json format, as an independent implementation.
//
// Usage: node encode.mjs TOKENIZER_JSON STRINGS_JSON [--add-special-tokens | --pre-tokenize]
// STRINGS_JSON holds a JSON array of strings; the output (stdout) is a JSON
// array with the token ids of each string. Without --add-special-tokens the
// post-processor adds nothing. With --pre-tokenize the output is instead
// the byte-level pre-tokenizer's chunks of each string (TOKENIZER_JSON is
// then ignored and may be "-").
import { readFileSync } from "node:fs";
import { Tokenizer, ByteLevelPreTokenizer } from "@huggingface/tokenizers";

const [tokPath, stringsPath, ...flags] = process.argv.slice(2);
if (!tokPath || !stringsPath) {
  console.error("usage: node encode.mjs TOKENIZER_JSON STRINGS_JSON [--add-special-tokens | --pre-tokenize]");
  process.exit(2);
}
const addSpecial = flags.includes("--add-special-tokens");
const strings = JSON.parse(readFileSync(stringsPath, "utf8"));
let out;
if (flags.includes("--pre-tokenize")) {
  const pre = new ByteLevelPreTokenizer({ add_prefix_space: false });
  out = strings.map((s) => pre.pre_tokenize_text(s, {}));
} else {
  const tokenizer = new Tokenizer(JSON.parse(readFileSync(tokPath, "utf8")), {});
  out = strings.map((s) => tokenizer.encode(s, { add_special_tokens: addSpecial }).ids);
}
// Let stdout drain on its own (no process.exit), so a pipe gets all of it.
process.stdout.write(JSON.stringify(out) + "\n");
