package yamlnode

import (
	"fmt"
	"math"
	"strconv"

	"go.yaml.in/yaml/v3"
)

// Range is a closed interval [Min, Max]; a single number means Min = Max.
type Range struct{ Min, Max float64 }

func (r *Range) DecodeNode(d *Decoder, n *yaml.Node, path string) error {
	switch n.Kind {
	case yaml.ScalarNode:
		f, err := ScalarFloat(n)
		if err != nil {
			return d.ErrAt(n, path, Show(n), "%v, or [min, max]", err)
		}
		r.Min, r.Max = f, f
		return nil
	case yaml.SequenceNode:
		if len(n.Content) != 2 {
			return d.ErrAt(n, path, Show(n), "want a number or [min, max] with two numbers")
		}
		lo, err := ScalarFloat(n.Content[0])
		if err != nil {
			return d.ErrAt(n.Content[0], path, Show(n), "minimum: %v", err)
		}
		hi, err := ScalarFloat(n.Content[1])
		if err != nil {
			return d.ErrAt(n.Content[1], path, Show(n), "maximum: %v", err)
		}
		if lo > hi {
			return d.ErrAt(n, path, Show(n), "minimum %s is greater than maximum %s; want [min, max] with min ≤ max", FormatFloat(lo), FormatFloat(hi))
		}
		r.Min, r.Max = lo, hi
		return nil
	}
	return d.ErrAt(n, path, Show(n), "want a number or [min, max], found %s", KindName(n))
}

// MarshalJSON writes [min, max].
func (r Range) MarshalJSON() ([]byte, error) {
	return []byte("[" + FormatFloat(r.Min) + "," + FormatFloat(r.Max) + "]"), nil
}

// FormatFloat prints the shortest decimal that reads back as f.
func FormatFloat(f float64) string { return strconv.FormatFloat(f, 'g', -1, 64) }

// IntRange is a closed integer interval.
type IntRange struct{ Min, Max int }

func (r *IntRange) DecodeNode(d *Decoder, n *yaml.Node, path string) error {
	var fr Range
	if err := fr.DecodeNode(d, n, path); err != nil {
		return err
	}
	if fr.Min != math.Trunc(fr.Min) || fr.Max != math.Trunc(fr.Max) {
		return d.ErrAt(n, path, Show(n), "want whole numbers")
	}
	r.Min, r.Max = int(fr.Min), int(fr.Max)
	return nil
}

// MarshalJSON writes [min, max].
func (r IntRange) MarshalJSON() ([]byte, error) {
	return []byte(fmt.Sprintf("[%d,%d]", r.Min, r.Max)), nil
}
