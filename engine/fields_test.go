package engine

import (
	"math/rand/v2"
	"regexp"
	"strings"
	"testing"
)

// TestValidName holds the hand-written name check to the rule it states,
// written as a regular expression: a letter or '_', then letters, digits,
// '_' and '-', at most MaxNameLen characters.
func TestValidName(t *testing.T) {
	rule := regexp.MustCompile(`^[A-Za-z_][A-Za-z0-9_-]*$`)
	cases := []string{"", "a", "_", "-", "1a", "a1", "stem", "skip-2", "block_3", "a b", "é", "a\x00",
		strings.Repeat("a", MaxNameLen), strings.Repeat("a", MaxNameLen+1)}
	rng := rand.New(rand.NewPCG(5, 6))
	const alphabet = "aZ_-09 .é\x00"
	for n := 0; n < 5000; n++ {
		var b strings.Builder
		for i := rng.IntN(8); i > 0; i-- {
			b.WriteByte(alphabet[rng.IntN(len(alphabet))])
		}
		cases = append(cases, b.String())
	}
	for _, s := range cases {
		want := len(s) <= MaxNameLen && rule.MatchString(s)
		if got := ValidName(s); got != want {
			t.Errorf("ValidName(%q) = %v, want %v", s, got, want)
		}
	}
}
