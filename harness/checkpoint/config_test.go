package checkpoint

import "testing"

func TestProbe(t *testing.T) {
	for _, s := range []string{
		`{"a": x}`,
		"{\n  \"model_type\": \"opt\",\n  \"vocab_size\": 12,,\n}",
		`{"model_type": "opt"`,
		`{"model_type":"llama","vocab_size":100,"hidden_size":98,"num_hidden_layers":1,"num_attention_heads":4,"intermediate_size":8,"max_position_embeddings":16}`,
		`{"model_type":"llama","vocab_size":100,"hidden_size":96,"num_hidden_layers":1,"num_attention_heads":4,"intermediate_size":8,"max_position_embeddings":16,"eos_token_id":"x"}`,
		`{"model_type":"llama","vocab_size":"100"}`,
		`{"model_type":"llama","vocab_size":100,"hidden_size":96,"num_hidden_layers":1,"num_attention_heads":4,"intermediate_size":8,"max_position_embeddings":16,"eos_token_id":[2, 1000]}`,
		`[]`,
	} {
		c, err := ParseConfig([]byte(s))
		t.Logf("%+v\n   err=%v", c, err)
	}
}
