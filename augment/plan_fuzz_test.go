package augment

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// FuzzParsePlan feeds any bytes to ParsePlan. It must never panic; a refusal
// is a *PlanError that says something; an accepted plan draws copies of a
// 16×16 source without panicking, and a drawn copy has a canvas inside
// 1..MaxSide and a finite matrix.
func FuzzParsePlan(f *testing.F) {
	files, err := filepath.Glob("../testdata/plans/*.yaml")
	if err != nil || len(files) == 0 {
		f.Fatalf("no plans under testdata/plans: %v", err)
	}
	for _, p := range files {
		b, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
		f.Add(b[:len(b)/2])
		flipped := bytes.Clone(b)
		flipped[len(flipped)/3] ^= 0x04
		f.Add(flipped)
		f.Add(bytes.Replace(b, []byte("  "), []byte("\t"), 1))
	}
	for _, s := range []string{
		"",
		"{}",
		"name: x\n",
		"name: x\ngeometry: {moves: [{do: rotate, angle: 3600, grow_canvas: true}]}\n",
		"name: x\ngeometry: {moves: [{do: crop, size: [1, 4096], aspect: [0.05, 20], to: [4096, 1]}]}\n",
		"name: x\ngeometry: {moves: [{do: pick, from: [{do: flip, axis: vertical}, {do: resize, to: [1, 1]}], odds: [0, 1]}]}\n",
		"name: x\ngeometry: {moves: [{do: warp, zoom: 0.05, shift: -4096, slant: 60}]}\npixels: [{do: cutout, count: 100, size: 4096}]\n",
		"name: x\ngeometry: {outside: {image: mirror, tone: [1, 2, 3]}, cuts: {policy: drop}}\npixels: [{do: pick, from: [{do: blur, sigma: 1}, {do: hue, angle: 9}]}]\n",
		"name: x\npixels: [{do: rotate, angle: 3}]\n",
		"name: x\nsteps: [{op: flip, axis: vertical}]\n",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		p, err := ParsePlan("fuzz.yaml", b)
		if err != nil {
			pe, ok := err.(*PlanError)
			if !ok {
				t.Fatalf("ParsePlan error is %T, not *PlanError: %v", err, err)
			}
			if pe.Msg == "" {
				t.Fatalf("PlanError with an empty Msg: %#v", pe)
			}
			if p != nil {
				t.Fatalf("ParsePlan returned a plan and an error: %v", err)
			}
			return
		}
		if p == nil {
			t.Fatal("ParsePlan returned neither a plan nor an error")
		}
		// Four copies from one fixed stream, so steps with a chance are
		// both taken and skipped.
		rng := rand.New(rand.NewPCG(1, 2))
		for range 4 {
			d, err := p.Draw(rng, 16, 16)
			if err != nil {
				continue // e.g. a rotation whose expanded canvas is over MaxSide
			}
			if d.W < 1 || d.H < 1 || d.W > MaxSide || d.H > MaxSide {
				t.Fatalf("drawn canvas %d×%d outside 1..%d", d.W, d.H, MaxSide)
			}
			for i, v := range d.M {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("drawn matrix entry %d is %v: %v", i, v, d.M)
				}
			}
			for _, op := range append(append([]manifest.LineageOp(nil), d.Geometry...), d.Pixels...) {
				// Every drawn parameter is finite, so the lineage marshals.
				if _, err := json.Marshal(op); err != nil {
					t.Fatalf("step %s: %v", op.Do, err)
				}
			}
		}
	})
}
