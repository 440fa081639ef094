package augment

import (
	"bytes"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
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
		"name: x\nsteps: [{op: rotate, degrees: 3600, expand: true}]\n",
		"name: x\nsteps: [{op: crop, size: [1, 4096], aspect: [0.05, 20], output: [4096, 1]}]\n",
		"name: x\nsteps: [{op: one-of, steps: [{op: flip, axis: vertical}, {op: resize, output: [1, 1]}], weights: [0, 1]}]\n",
		"name: x\nsteps: [{op: affine, scale: 0.05, translate: -4096, shear: 60}, {op: cutout, count: 100, size: 4096}]\n",
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
			for _, op := range d.Ops {
				for k, v := range op.Params {
					if math.IsNaN(v) || math.IsInf(v, 0) {
						t.Fatalf("step %s: parameter %s is %v", op.Op, k, v)
					}
				}
			}
		}
	})
}
