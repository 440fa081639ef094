package gen

import (
	"embed"
	"fmt"
	"sort"
	"strings"
)

//go:embed presets/*.yaml
var presetFS embed.FS

// DefaultPreset is used when neither a preset nor a recipe is given.
const DefaultPreset = "workshop-parts"

// PresetNames lists the built-in presets, sorted.
func PresetNames() []string {
	ents, _ := presetFS.ReadDir("presets")
	var names []string
	for _, e := range ents {
		names = append(names, strings.TrimSuffix(e.Name(), ".yaml"))
	}
	sort.Strings(names)
	return names
}

// PresetYAML returns a preset's recipe text.
func PresetYAML(name string) ([]byte, error) {
	b, err := presetFS.ReadFile("presets/" + name + ".yaml")
	if err != nil {
		return nil, fmt.Errorf("unknown preset %q; built-in presets: %s", name, strings.Join(PresetNames(), ", "))
	}
	return b, nil
}

// Preset parses a built-in preset.
func Preset(name string) (*Recipe, error) {
	b, err := PresetYAML(name)
	if err != nil {
		return nil, err
	}
	return ParseRecipe("preset:"+name, b)
}
