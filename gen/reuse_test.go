package gen

import (
	"bytes"
	"image"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// TestReuseSamplesSameBytes holds ReuseSamples (each sample drawn over the
// previous one's images) to fresh images per sample: the same PNG bytes
// for 24 samples of every preset.
func TestReuseSamplesSameBytes(t *testing.T) {
	for _, name := range PresetNames() {
		r, err := Preset(name)
		if err != nil {
			t.Fatal(err)
		}
		fresh, reused := NewRenderer(r), NewRenderer(r)
		reused.ReuseSamples()
		enc := manifest.NewEncoder()
		for i := 0; i < 24; i++ {
			a, err := fresh.Generate(3, i)
			if err != nil {
				t.Fatal(err)
			}
			b, err := reused.Generate(3, i)
			if err != nil {
				t.Fatal(err)
			}
			for k, pair := range [3][2]image.Image{{a.Image, b.Image}, {a.Mask, b.Mask}, {a.Instances, b.Instances}} {
				pa, err := enc.Encode(pair[0])
				if err != nil {
					t.Fatal(err)
				}
				pa = bytes.Clone(pa)
				pb, err := enc.Encode(pair[1])
				if err != nil {
					t.Fatal(err)
				}
				if !bytes.Equal(pa, pb) {
					t.Errorf("%s sample %d: file %d differs with ReuseSamples", name, i, k)
				}
			}
		}
	}
}
