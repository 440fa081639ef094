package manifest

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
)

// EvalTarget computes target t from a record's measured objects (those with
// Area > 0 count; the rest are gone). Counts are the objects of t's classes;
// sum, min, max and mean run over Of (value, area, size or angle; objects
// without a value are left out of value aggregates), and an empty selection
// gives 0. Size and angle are plan factors: a selected object without a
// planned one (an object read from a plain folder) is an error, never a 0.
// Text joins the glyphs in reading order and number reads that text as an
// integer. order sorts the selected object indices into reading order; nil
// means left to right by center x (the planned center, else the measured
// one).
func EvalTarget(t TargetDef, objs []Object, order func(sel []int)) (Value, error) {
	want := map[string]bool{}
	for _, c := range t.Classes {
		want[c] = true
	}
	var sel []int
	for i := range objs {
		if objs[i].Area > 0 && (len(t.Classes) == 0 || want[objs[i].ClassName]) {
			sel = append(sel, i)
		}
	}
	switch t.Kind {
	case "count":
		return Number(float64(len(sel))), nil
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
			case "size", "angle":
				f := o.Size
				if t.Of == "angle" {
					f = o.Angle
				}
				if f == nil {
					return Value{}, fmt.Errorf("target %s: %s of object %d (class %s): the object has no planned %s (objects read from a plain folder have none); use of: area", t.Name, t.Of, o.Instance, o.ClassName, t.Of)
				}
				vals = append(vals, *f)
			}
		}
		return Number(Round(Aggregate(t.Kind, vals), 6)), nil
	case "text", "number":
		if order != nil {
			order(sel)
		} else {
			sort.SliceStable(sel, func(a, b int) bool { return objs[sel[a]].ReadingX() < objs[sel[b]].ReadingX() })
		}
		var b strings.Builder
		for _, i := range sel {
			b.WriteString(objs[i].Glyph)
		}
		s := b.String()
		if t.Kind == "text" {
			return Text(s), nil
		}
		if s == "" {
			return Number(0), nil
		}
		if len(s) > 15 {
			return Value{}, fmt.Errorf("target %s: the reading %q has more than 15 digits, beyond exact float64 integers", t.Name, s)
		}
		n, err := strconv.ParseInt(s, 10, 64)
		if err != nil {
			return Value{}, fmt.Errorf("target %s: reading %q is not a number", t.Name, s)
		}
		return Number(float64(n)), nil
	}
	return Value{}, fmt.Errorf("target %s: unknown kind %q", t.Name, t.Kind)
}

// Aggregate is sum, min, max or mean of vals; an empty set gives 0.
func Aggregate(kind string, vals []float64) float64 {
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

// ReadingX is the x that orders an object in a reading: its planned center,
// or its measured center where no plan set one.
func (o *Object) ReadingX() float64 {
	if o.Center != nil {
		return o.Center[0]
	}
	return o.MeasuredCenter[0]
}
