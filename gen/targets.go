package gen

import (
	"github.com/trueset/trueset/manifest"
)

// targets computes every recipe target from the measured objects
// (manifest.EvalTarget): counts are distinct instance ids present in the
// instance mask, areas are mask pixels, and the plan supplies values, sizes,
// angles and characters. Readings follow the plan's reading order: pen order
// in rows, left to right elsewhere.
func (r *Recipe) targets(p *Plan, objs []manifest.Object, specs []TargetSpec) (map[string]manifest.Value, error) {
	out := make(map[string]manifest.Value, len(specs))
	order := func(sel []int) { readingOrder(p.Objects, sel) }
	for _, t := range specs {
		v, err := manifest.EvalTarget(t.def(), objs, order)
		if err != nil {
			return nil, err
		}
		out[t.Name] = v
	}
	return out, nil
}

// def is the target's definition as dataset.json records it.
func (t TargetSpec) def() manifest.TargetDef {
	return manifest.TargetDef{Name: t.Name, Kind: t.Kind, Classes: t.Classes, Of: t.Of}
}
