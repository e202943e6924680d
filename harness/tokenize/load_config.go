package tokenize

import (
	"encoding/json"
	"fmt"
	"os"
	"sort"
	"strconv"
)

// tokenName is a special-token name and where it was configured.
type tokenName struct {
	value string
	file  string
	field string
}

// config is what tokenizer_config.json and special_tokens_map.json say.
type config struct {
	file           string // tokenizer_config.json path, for messages
	addBOS, addEOS bool
	bos, eos, pad  tokenName
	unk            tokenName
	addPrefixSpace *bool        // two-file layout only
	added          []addedToken // added_tokens_decoder (two-file layout only)
}

// readConfigs reads the optional config files. twoFile is true for the
// vocab.json + merges.txt layout; only then are add_prefix_space and
// added_tokens_decoder read (tokenizer.json states both itself).
func readConfigs(cfgPath, mapPath string, twoFile bool) (*config, error) {
	cfg := &config{file: cfgPath}
	names := map[string]*tokenName{"bos_token": &cfg.bos, "eos_token": &cfg.eos, "pad_token": &cfg.pad, "unk_token": &cfg.unk}
	keys := []string{"bos_token", "eos_token", "pad_token", "unk_token"}
	if fields, err := readJSONObject(cfgPath); err != nil {
		return nil, err
	} else if fields != nil {
		for _, k := range keys {
			if err := readTokenName(cfgPath, k, fields[k], names[k]); err != nil {
				return nil, err
			}
		}
		if err := readBool(cfgPath, "add_bos_token", fields["add_bos_token"], &cfg.addBOS); err != nil {
			return nil, err
		}
		if err := readBool(cfgPath, "add_eos_token", fields["add_eos_token"], &cfg.addEOS); err != nil {
			return nil, err
		}
		if r := fields["add_prefix_space"]; twoFile && !isNull(r) {
			var v bool
			if err := readBool(cfgPath, "add_prefix_space", r, &v); err != nil {
				return nil, err
			}
			cfg.addPrefixSpace = &v
		}
		if twoFile {
			if err := readAddedDecoder(cfgPath, fields["added_tokens_decoder"], cfg); err != nil {
				return nil, err
			}
		}
	}
	if fields, err := readJSONObject(mapPath); err != nil {
		return nil, err
	} else if fields != nil {
		for _, k := range keys {
			if names[k].value != "" {
				continue // tokenizer_config.json wins
			}
			if err := readTokenName(mapPath, k, fields[k], names[k]); err != nil {
				return nil, err
			}
		}
	}
	return cfg, nil
}

// readJSONObject reads an optional JSON object file; (nil, nil) when
// the file does not exist.
func readJSONObject(path string) (map[string]json.RawMessage, error) {
	data, err := os.ReadFile(path)
	if os.IsNotExist(err) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("tokenize: read %s: %w", path, err)
	}
	var fields map[string]json.RawMessage
	if err := json.Unmarshal(data, &fields); err != nil {
		return nil, jsonErr(path, data, err)
	}
	if fields == nil {
		fields = map[string]json.RawMessage{}
	}
	return fields, nil
}

// readTokenName reads a token given as a string or as {"content": ...}.
func readTokenName(path, field string, raw json.RawMessage, dst *tokenName) error {
	if isNull(raw) {
		return nil
	}
	var s string
	if json.Unmarshal(raw, &s) != nil {
		var obj struct {
			Content *string `json:"content"`
		}
		if json.Unmarshal(raw, &obj) != nil || obj.Content == nil {
			return errAt(path, "field "+field, "%s is neither a token string nor an object with a \"content\" string; fix the field", string(raw))
		}
		s = *obj.Content
	}
	if s == "" {
		return nil
	}
	*dst = tokenName{value: s, file: path, field: field}
	return nil
}

func readBool(path, field string, raw json.RawMessage, dst *bool) error {
	if isNull(raw) {
		return nil
	}
	if err := json.Unmarshal(raw, dst); err != nil {
		return errAt(path, "field "+field, "%s is not true or false; fix the field", string(raw))
	}
	return nil
}

// readAddedDecoder reads added_tokens_decoder ({"id": {"content": ...,
// "special": ...}}), in id order.
func readAddedDecoder(path string, raw json.RawMessage, cfg *config) error {
	if isNull(raw) {
		return nil
	}
	var m map[string]struct {
		Content string `json:"content"`
		Special bool   `json:"special"`
	}
	if err := json.Unmarshal(raw, &m); err != nil {
		return errAt(path, "field added_tokens_decoder", "cannot decode: %v; it must map ids to {\"content\": ..., \"special\": ...}", err)
	}
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		id, err := strconv.Atoi(k)
		if err != nil || id < 0 {
			return errAt(path, fmt.Sprintf("field added_tokens_decoder[%q]", k), "the key is not a non-negative integer id; fix the key")
		}
		if m[k].Content == "" {
			return errAt(path, fmt.Sprintf("field added_tokens_decoder[%q]", k), "empty content; give the token's text")
		}
		cfg.added = append(cfg.added, addedToken{id: id, content: m[k].Content, special: m[k].Special})
	}
	return nil
}
