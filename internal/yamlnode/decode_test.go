package yamlnode

import "testing"

// Worked examples of the optimal string alignment distance, from memory:
// "kitten" → "sitting" is 3 (the textbook Levenshtein example; it has no
// transposition, so OSA agrees); "ca" → "abc" is 3 under OSA but 2 under
// the unrestricted Damerau–Levenshtein distance (the usual example of how
// the two differ).
func TestEditDistance(t *testing.T) {
	cases := []struct {
		a, b string
		want int
	}{
		{"kitten", "sitting", 3},
		{"ca", "abc", 3},
		{"szie", "size", 1},
		{"", "abc", 3},
		{"same", "same", 0},
	}
	for _, c := range cases {
		if got := editDistance(c.a, c.b); got != c.want {
			t.Errorf("editDistance(%q, %q) = %d, want %d", c.a, c.b, got, c.want)
		}
	}
}

func TestNearest(t *testing.T) {
	names := []string{"angle", "aspect", "color", "count", "size"}
	for in, want := range map[string]string{"szie": "size", "cuont": "count", "colr": "color", "xyz": "", "a": ""} {
		if got := Nearest(in, names); got != want {
			t.Errorf("Nearest(%q) = %q, want %q", in, got, want)
		}
	}
}
