package gen

import (
	"bytes"
	"testing"
)

// The normalized recipe stored in dataset.json must parse back to itself, so
// that a dataset can be regenerated from dataset.json alone. (JSON is valid
// YAML 1.2 flow syntax, so the same parser reads it.)
func TestNormalizedRecipeRoundTrip(t *testing.T) {
	for _, name := range PresetNames() {
		r, err := Preset(name)
		if err != nil {
			t.Fatal(err)
		}
		a, ha, err := r.RecipeJSON()
		if err != nil {
			t.Fatal(err)
		}
		r2, err := ParseRecipe("dataset.json", a)
		if err != nil {
			t.Fatalf("%s: normalized recipe does not parse: %v\n%s", name, err, a)
		}
		b, hb, _ := r2.RecipeJSON()
		if !bytes.Equal(a, b) || ha != hb {
			t.Fatalf("%s: normalized recipe changes when parsed again:\n%s\n%s", name, a, b)
		}
	}
}
