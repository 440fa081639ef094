package augment

import "github.com/trueset/trueset/manifest"

// recompute evaluates every defined target on the relabeled objects
// (manifest.EvalTarget); a target without a definition keeps its old value.
// Text readings take the glyphs left to right by their mapped centers (flips
// of text are refused before any work, and turns are bounded, so this is the
// reading order). A reading that no longer parses as a number gives 0.
func recompute(defs []manifest.TargetDef, objs []manifest.Object, old map[string]manifest.Value) map[string]manifest.Value {
	out := make(map[string]manifest.Value, len(old))
	for k, v := range old {
		out[k] = v
	}
	for _, t := range defs {
		v, err := manifest.EvalTarget(t, objs, nil)
		if err != nil {
			v = manifest.Number(0)
		}
		out[t.Name] = v
	}
	return out
}
