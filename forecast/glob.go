package forecast

import "unicode/utf8"

// glob reports whether s matches pattern, where '*' matches any run of
// characters (also none) and '?' exactly one character; every other
// character matches itself. It backtracks only to the most recent '*', so
// it runs in O(len(pattern)·len(s)) at worst and linear time in practice.
func glob(pattern, s string) bool {
	p, i := 0, 0
	star, mark := -1, 0 // position after the last '*', and where s resumed then
	for i < len(s) {
		if p < len(pattern) {
			switch c := pattern[p]; c {
			case '*':
				star, mark = p+1, i
				p++
				continue
			case '?':
				_, n := utf8.DecodeRuneInString(s[i:])
				p++
				i += n
				continue
			default:
				if c == s[i] {
					p++
					i++
					continue
				}
			}
		}
		if star < 0 {
			return false
		}
		// Let the last '*' swallow one more character and retry.
		_, n := utf8.DecodeRuneInString(s[mark:])
		mark += n
		p, i = star, mark
	}
	for p < len(pattern) && pattern[p] == '*' {
		p++
	}
	return p == len(pattern)
}

// hasGlob reports whether s contains a glob metacharacter.
func hasGlob(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] == '*' || s[i] == '?' {
			return true
		}
	}
	return false
}
