package augment

import (
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/trueset/trueset/manifest"
)

// recompute evaluates every defined target on the relabelled objects; a
// target without a definition keeps its old value. Text readings take the
// glyphs left to right by their mapped centres (flips of text are refused
// before any work, and turns are bounded, so this is the reading order).
func recompute(defs []manifest.TargetDef, objs []manifest.Object, old map[string]manifest.Value) map[string]manifest.Value {
	out := make(map[string]manifest.Value, len(old))
	for k, v := range old {
		out[k] = v
	}
	for _, t := range defs {
		want := map[string]bool{}
		for _, c := range t.Classes {
			want[c] = true
		}
		var sel []manifest.Object
		for _, o := range objs {
			if o.Area > 0 && (len(t.Classes) == 0 || want[o.ClassName]) {
				sel = append(sel, o)
			}
		}
		switch t.Kind {
		case "count":
			out[t.Name] = manifest.Number(float64(len(sel)))
		case "sum", "min", "max", "mean":
			var vals []float64
			for _, o := range sel {
				switch t.Of {
				case "value":
					if o.Value != nil {
						vals = append(vals, *o.Value)
					}
				case "area":
					vals = append(vals, float64(o.Area))
				case "size":
					vals = append(vals, o.Size)
				case "angle":
					vals = append(vals, o.Angle)
				}
			}
			out[t.Name] = manifest.Number(manifest.Round(aggregate(t.Kind, vals), 6))
		case "text", "number":
			sort.SliceStable(sel, func(a, b int) bool { return sel[a].Centre[0] < sel[b].Centre[0] })
			var b strings.Builder
			for _, o := range sel {
				b.WriteString(o.Glyph)
			}
			if t.Kind == "text" {
				out[t.Name] = manifest.Text(b.String())
			} else if n, err := strconv.ParseInt(b.String(), 10, 64); err == nil {
				out[t.Name] = manifest.Number(float64(n))
			} else {
				out[t.Name] = manifest.Number(0)
			}
		}
	}
	return out
}

// aggregate is sum, min, max or mean; an empty set gives 0 (as generate does).
func aggregate(kind string, vals []float64) float64 {
	if len(vals) == 0 {
		return 0
	}
	r := vals[0]
	if kind == "sum" || kind == "mean" {
		r = 0
	}
	for _, v := range vals {
		switch kind {
		case "sum", "mean":
			r += v
		case "min":
			r = math.Min(r, v)
		case "max":
			r = math.Max(r, v)
		}
	}
	if kind == "mean" {
		r /= float64(len(vals))
	}
	return r
}
