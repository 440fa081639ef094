package gen

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/trueset/trueset/manifest"
)

// targets computes every recipe target from the measured objects: counts are
// distinct instance ids present in the instance mask, areas are mask pixels,
// and the plan supplies values, sizes, angles and characters.
func (r *Recipe) targets(p *Plan, objs []manifest.Object, specs []TargetSpec) (map[string]manifest.Value, error) {
	out := make(map[string]manifest.Value, len(specs))
	for _, t := range specs {
		var sel []int
		for i := range objs {
			if objs[i].Area > 0 && r.inClasses(objs[i].Class, t.Classes) {
				sel = append(sel, i)
			}
		}
		switch t.Kind {
		case "count":
			out[t.Name] = manifest.Number(float64(len(sel)))
		case "sum", "min", "max", "mean":
			var vals []float64
			for _, i := range sel {
				o := &objs[i]
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
			readingOrder(p.Objects, sel)
			var b strings.Builder
			for _, i := range sel {
				b.WriteString(objs[i].Glyph)
			}
			if t.Kind == "text" {
				out[t.Name] = manifest.Text(b.String())
				break
			}
			s := b.String()
			if s == "" {
				out[t.Name] = manifest.Number(0)
				break
			}
			if len(s) > 15 {
				return nil, fmt.Errorf("target %s: the reading %q has more than 15 digits, beyond exact float64 integers", t.Name, s)
			}
			n, err := strconv.ParseInt(s, 10, 64)
			if err != nil {
				return nil, fmt.Errorf("target %s: reading %q is not a number", t.Name, s)
			}
			out[t.Name] = manifest.Number(float64(n))
		}
	}
	return out, nil
}

// aggregate returns sum, min, max or mean of vals; an empty set gives 0.
func aggregate(kind string, vals []float64) float64 {
	if len(vals) == 0 {
		return 0
	}
	switch kind {
	case "sum", "mean":
		s := 0.0
		for _, v := range vals {
			s += v
		}
		if kind == "mean" {
			return s / float64(len(vals))
		}
		return s
	case "min":
		m := math.Inf(1)
		for _, v := range vals {
			m = math.Min(m, v)
		}
		return m
	}
	m := math.Inf(-1)
	for _, v := range vals {
		m = math.Max(m, v)
	}
	return m
}
