package suites

import "unicode/utf8"

func utf8Valid(b []byte) bool { return utf8.Valid(b) }

// InvalidUTF8At returns the offset of the first byte of b that is not valid
// UTF-8, or -1 when b is valid; messages about data files point there.
func InvalidUTF8At(b []byte) int {
	for i := 0; i < len(b); {
		r, n := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && n <= 1 {
			return i
		}
		i += n
	}
	return -1
}
