package gen

import (
	"fmt"
	"strings"

	"github.com/trueset/trueset/manifest"
)

// contentTargets evaluates the targets that content alone decides (counts,
// values, readings of rows) on a content draw. Every planned object ends up
// in the instance mask (an invisible one is re-planned), so these equal the
// rendered targets.
func (r *Recipe) contentTargets(objs []ObjectPlan) map[string]manifest.Value {
	rec := r.contentRecord(objs)
	return rec.Targets
}

func (r *Recipe) contentRecord(objs []ObjectPlan) *manifest.Record {
	table := r.ClassTable()
	mo := make([]manifest.Object, len(objs))
	for i := range objs {
		o := &objs[i]
		mo[i] = manifest.Object{Instance: i + 1, Class: o.Class, ClassName: table[o.Class].Name, Area: 1, Value: o.Value}
		if o.Kind == "glyph" {
			mo[i].Glyph = string(o.Glyph)
		}
	}
	p := &Plan{Objects: objs}
	var keep []TargetSpec
	for _, t := range r.Targets {
		if r.contentDecides(t) {
			keep = append(keep, t)
		}
	}
	vals, _ := r.targets(p, mo, keep) // errors (over-long numbers) surface when rendering
	return &manifest.Record{Objects: mo, Targets: vals}
}

// contentDecides reports whether target t is fixed by a sample's content
// (not by its geometry): counts, value aggregates, and readings of glyphs
// that sit in row layouts, whose reading order is their draw order.
func (r *Recipe) contentDecides(t TargetSpec) bool {
	switch t.Kind {
	case "count":
		return true
	case "sum", "min", "max", "mean":
		return t.Of == "value"
	case "text", "number":
		for li := range r.Layers {
			if r.Layers[li].Layout.Kind == "row" {
				continue
			}
			for _, o := range r.Layers[li].Objects {
				if o.Glyph != nil && r.inClasses(o.classID, t.Classes) {
					return false
				}
			}
		}
		return true
	}
	return false
}

// Stratum returns sample index's stratum under key, computed from its
// content before any pixel exists.
func (r *Recipe) Stratum(seed uint64, index int, key string) (string, error) {
	objs, err := r.Content(seed, index)
	if err != nil {
		return "", err
	}
	if h := r.heldOutStratum(objs); h != "" {
		return h, nil
	}
	return manifest.StratumOf(r.contentRecord(objs), key)
}

// CheckStratify tells whether key can be computed from plans: a target that
// content decides, class:NAME for a declared class, "classes", or "".
func (r *Recipe) CheckStratify(key string) error {
	switch {
	case key == "" || key == "classes":
		return nil
	case strings.HasPrefix(key, "class:"):
		name := strings.TrimPrefix(key, "class:")
		if _, ok := r.classID[name]; !ok {
			return fmt.Errorf("stratify %q: no class %q in the recipe", key, name)
		}
		return nil
	}
	var names []string
	for _, t := range r.Targets {
		if t.Name == key {
			if !r.contentDecides(t) {
				return fmt.Errorf("stratify %q: target %s (%s of %s) depends on geometry, which is drawn after the split; stratify by a count, a value aggregate or a row reading, or generate first and re-deal the finished set with trueset split DIR --stratify %s, which reads the rendered records", key, t.Name, t.Kind, t.Of, key)
			}
			return nil
		}
		names = append(names, t.Name)
	}
	return fmt.Errorf("stratify %q: want a target name (%s), class:NAME or classes", key, strings.Join(names, ", "))
}
