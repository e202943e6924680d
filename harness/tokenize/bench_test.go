package tokenize

import (
	"math/rand/v2"
	"strings"
	"testing"
)

// zipfCorpus returns about n bytes of text over a large pseudo-word
// vocabulary with Zipf-distributed frequencies, closer to real text than
// genCorpus for measuring Train.
func zipfCorpus(n int) []string {
	r := rand.New(rand.NewPCG(5, 6))
	letters := "etaoinshrdlcumwfgypbvkjxqz"
	words := make([]string, 30000)
	for i := range words {
		var sb strings.Builder
		for k := 2 + r.IntN(8); k > 0; k-- {
			sb.WriteByte(letters[int(r.ExpFloat64()*5)%len(letters)])
		}
		words[i] = sb.String()
	}
	z := rand.NewZipf(r, 1.1, 2, uint64(len(words)-1))
	var docs []string
	var sb strings.Builder
	for total := 0; total < n; {
		w := words[z.Uint64()]
		if r.IntN(10) == 0 {
			w = strings.ToUpper(w[:1]) + w[1:] + ","
		}
		sb.WriteString(w)
		sb.WriteByte(" \n"[min(r.IntN(12), 1)])
		if sb.Len() > 4000 {
			total += sb.Len()
			docs = append(docs, sb.String())
			sb.Reset()
		}
	}
	return docs
}

func BenchmarkTrain2000On1MB(b *testing.B) {
	corpus := zipfCorpus(1 << 20)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := Train(corpus, TrainOptions{VocabSize: 2000}); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkEncode(b *testing.B) {
	corpus := zipfCorpus(1 << 20)
	tok, err := Train(corpus, TrainOptions{VocabSize: 2000})
	if err != nil {
		b.Fatal(err)
	}
	text := strings.Join(corpus[:25], "")
	b.SetBytes(int64(len(text)))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		tok.Encode(text)
	}
}

func BenchmarkEncodeColdCache(b *testing.B) {
	corpus := zipfCorpus(1 << 20)
	text := strings.Join(corpus[:25], "")
	b.SetBytes(int64(len(text)))
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		tok, err := Train(corpus[:50], TrainOptions{VocabSize: 1000})
		if err != nil {
			b.Fatal(err)
		}
		b.StartTimer()
		tok.Encode(text)
	}
}
