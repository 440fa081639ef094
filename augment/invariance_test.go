package augment

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// Invariance rules (DESIGN.md and manifest.Class): a class may declare that
// its label does not survive a mirror (Flip false: a mirrored glyph is no
// longer that glyph) or a turn beyond MaxRotate degrees (a 6 turned over
// reads 9); samples whose targets read text must not be mirrored or turned
// upside down (beyond ±90°: facts of the trade about reading text). A plan
// that breaks one is refused before any work, naming the class or target and
// the step's path in the plan file.

func invBool(b bool) *bool         { return &b }
func invDeg(f float64) *float64    { return &f }
func invClasses() []manifest.Class { return append([]manifest.Class(nil), labClasses...) }

// invRefuses wants CheckInvariance to refuse p with an error containing
// every one of want.
func invRefuses(t *testing.T, what string, p *Plan, classes []manifest.Class, defs []manifest.TargetDef, want ...string) {
	t.Helper()
	err := CheckInvariance(p, classes, defs)
	if err == nil {
		t.Errorf("%s: accepted, want a refusal naming %q", what, want)
		return
	}
	for _, w := range want {
		if !strings.Contains(err.Error(), w) {
			t.Errorf("%s: error %q does not name %q", what, err, w)
		}
	}
}

func invAccepts(t *testing.T, what string, p *Plan, classes []manifest.Class, defs []manifest.TargetDef) {
	t.Helper()
	if err := CheckInvariance(p, classes, defs); err != nil {
		t.Errorf("%s: refused: %v", what, err)
	}
}

func TestCheckInvarianceFlip(t *testing.T) {
	cls := invClasses()
	cls[2].Flip = invBool(false) // "block" does not survive a mirror
	p := labParsePlan(t, `
name: flips
geometry:
  moves:
    - {do: rotate, angle: [-10, 10]}
    - {do: flip, axis: vertical, chance: 0.5}
pixels:
  - {do: brightness, delta: [-5, 5]}
`)
	invRefuses(t, "flip of a no-flip class", p, cls, labDefs, `"block"`, "geometry.moves[1]")
	// Flip true, or absent, keeps the label.
	ok := invClasses()
	ok[1].Flip = invBool(true)
	invAccepts(t, "flip of classes that allow it", p, ok, labDefs)
	// A flip that never happens breaks nothing.
	never := labParsePlan(t, `
name: no-flip
geometry:
  moves:
    - {do: flip, axis: horizontal, chance: 0}
    - {do: rotate, angle: [-10, 10]}
`)
	invAccepts(t, "flip with chance 0", never, cls, labDefs)
	// Inside a pick, the child's path is named.
	nested := labParsePlan(t, `
name: nested
geometry:
  moves:
    - do: pick
      from:
        - {do: rotate, angle: [-5, 5]}
        - {do: flip, axis: horizontal}
pixels:
  - {do: blur, sigma: [0.5, 1]}
`)
	invRefuses(t, "flip inside pick", nested, cls, labDefs, `"block"`, "geometry.moves[0].from[1]")
	// A pick that never happens is not looked into.
	nestedNever := labParsePlan(t, `
name: nested-never
geometry:
  moves:
    - do: pick
      chance: 0
      from:
        - {do: flip, axis: horizontal}
`)
	invAccepts(t, "pick with chance 0", nestedNever, cls, labDefs)
	// A child with chance 0 inside a pick is not either.
	childNever := labParsePlan(t, `
name: child-never
geometry:
  moves:
    - do: pick
      from:
        - {do: flip, axis: horizontal, chance: 0}
        - {do: rotate, angle: [-5, 5]}
`)
	invAccepts(t, "pick child with chance 0", childNever, cls, labDefs)
}

func TestCheckInvarianceRotate(t *testing.T) {
	cls := invClasses()
	cls[1].MaxRotate = invDeg(15) // "disc" keeps its label within ±15°
	wide := labParsePlan(t, `
name: wide
geometry:
  moves:
    - {do: flip, axis: horizontal, chance: 0.5}
    - {do: rotate, angle: [-10, 30]}
`)
	invRefuses(t, "turn beyond max_rotate", wide, cls, labDefs, `"disc"`, "geometry.moves[1]", "30", "15")
	narrow := labParsePlan(t, `
name: narrow
geometry:
  moves:
    - {do: rotate, angle: [-10, 10]}
    - {do: warp, zoom: [0.9, 1.1], slant: [-5, 5]}
`)
	// A slant of 5° tilts the y axis by 5°; with ±10° of turn, 15° in all.
	invAccepts(t, "turn within max_rotate", narrow, cls, labDefs)
	single := labParsePlan(t, `
name: single
geometry:
  moves:
    - {do: rotate, angle: [-15, 15]}
`)
	invAccepts(t, "one turn of exactly max_rotate", single, cls, labDefs)
	negative := labParsePlan(t, `
name: negative
geometry:
  moves:
    - {do: rotate, angle: [-40, 5]}
`)
	invRefuses(t, "negative turn beyond max_rotate", negative, cls, labDefs, `"disc"`, "geometry.moves[0]", "40", "15")
	nested := labParsePlan(t, `
name: nested
geometry:
  moves:
    - do: pick
      odds: [3, 1]
      from:
        - {do: rotate, angle: [-5, 5]}
        - {do: rotate, angle: [-90, 90]}
`)
	invRefuses(t, "turn inside pick", nested, cls, labDefs, `"disc"`, "geometry.moves[0].from[1]", "90", "15")
	never := labParsePlan(t, `
name: never
geometry:
  moves:
    - {do: rotate, angle: [-90, 90], chance: 0}
`)
	invAccepts(t, "wide turn with chance 0", never, cls, labDefs)

	// Turns compose (rotation matrices multiply, angles add): two steps of
	// ±10° each turn a copy by up to 20°, beyond the 15° of "disc", though
	// neither step alone goes beyond. First show that copies really are
	// turned that far (the composed matrix's angle), then want a refusal.
	twice := labParsePlan(t, `
name: twice
geometry:
  moves:
    - {do: rotate, angle: [-10, 10]}
    - {do: rotate, angle: [-10, 10]}
pixels:
  - {do: brightness, delta: [-5, 5]}
`)
	in := labSources()[0]
	worst := 0.0
	for k := 1; k <= 40; k++ {
		out, err := twice.Copy(in, 1, 0, k, labDefs)
		if err != nil {
			t.Fatal(err)
		}
		worst = max(worst, math.Abs(Mat(out.Record.Lineage.Matrix).Angle()))
	}
	if worst <= 15 {
		t.Fatalf("40 copies of two ±10° turns turned at most %.1f°; the test needs one beyond 15°", worst)
	}
	t.Logf("two ±10° turns: copies turned up to %.1f°", worst)
	invRefuses(t, "two turns adding up beyond max_rotate", twice, cls, labDefs, `"disc"`, "geometry.moves[1]", "20", "15")
	// The worst child of a pick counts: ±12 then ±5 is 17 > 15 …
	choice := labParsePlan(t, `
name: choice
geometry:
  moves:
    - do: pick
      from:
        - {do: rotate, angle: [-5, 5]}
        - {do: rotate, angle: [-12, 12]}
    - {do: rotate, angle: [-5, 5]}
`)
	invRefuses(t, "pick turn plus a turn", choice, cls, labDefs, `"disc"`, "geometry.moves[1]", "17", "15")
	// … while ±8 then ±5 is 13 ≤ 15; and turns with chance 0 add nothing.
	fine := labParsePlan(t, `
name: fine
geometry:
  moves:
    - do: pick
      from:
        - {do: rotate, angle: [-5, 5]}
        - {do: rotate, angle: [-8, 8]}
    - {do: rotate, angle: [-60, 60], chance: 0}
    - {do: rotate, angle: [-5, 5]}
`)
	invAccepts(t, "turns adding up within max_rotate", fine, cls, labDefs)
}

func TestCheckInvarianceText(t *testing.T) {
	cls := invClasses()
	text := append(append([]manifest.TargetDef(nil), labDefs...), manifest.TargetDef{Name: "reading", Kind: "text"})
	number := append(append([]manifest.TargetDef(nil), labDefs...), manifest.TargetDef{Name: "code", Kind: "number"})
	flip := labParsePlan(t, `
name: flip
geometry:
  moves:
    - {do: rotate, angle: [-5, 5]}
    - {do: flip, axis: horizontal, chance: 0.3}
`)
	invRefuses(t, "flip of text", flip, cls, text, `"reading"`, "geometry.moves[1]")
	invRefuses(t, "flip of a number reading", flip, cls, number, `"code"`, "geometry.moves[1]")
	invAccepts(t, "flip without text targets", flip, cls, labDefs)
	over := labParsePlan(t, `
name: over
geometry:
  moves:
    - {do: rotate, angle: [-120, 120]}
`)
	invRefuses(t, "turn of text beyond 90°", over, cls, text, `"reading"`, "geometry.moves[0]", "120")
	upright := labParsePlan(t, `
name: upright
geometry:
  moves:
    - {do: rotate, angle: [-90, 90]}
    - {do: crop, area: [0.8, 1]}
pixels:
  - {do: gaussian-noise, sigma: 3}
`)
	invAccepts(t, "text turned within ±90°", upright, cls, text)
	// Two ±60° turns can turn text by 120°: upside down.
	twice := labParsePlan(t, `
name: twice
geometry:
  moves:
    - {do: rotate, angle: [-60, 60]}
    - {do: rotate, angle: [-60, 60]}
`)
	invRefuses(t, "two turns of text adding up beyond 90°", twice, cls, text, `"reading"`, "geometry.moves[1]", "120")
}

// TestRunRefusesBrokenInvarianceBeforeWriting: augment.Run on a dataset
// whose "disc" class does not survive a flip, with the every-step plan
// (which flips), is refused before anything is written: the output folder
// does not exist afterwards. With AllowLabelChange the same run goes
// through, verifies clean, and dataset.json says so.
func TestRunRefusesBrokenInvarianceBeforeWriting(t *testing.T) {
	tmp := t.TempDir()
	in := filepath.Join(tmp, "in")
	cls := invClasses()
	cls[1].Flip = invBool(false)
	labWriteDataset(t, in, cls, labE2ESources()[:6])
	labVerify(t, in)
	out := filepath.Join(tmp, "out")
	o := RunOptions{In: in, Out: out, Plan: labEveryStep(t), Copies: 2, Seed: 3, Workers: 2, Version: "test"}
	_, err := Run(context.Background(), o)
	if err == nil || !strings.Contains(err.Error(), `"disc"`) || !strings.Contains(err.Error(), "geometry.moves[0]") {
		t.Fatalf("Run with a flip of a no-flip class: err = %v, want a refusal naming \"disc\" and geometry.moves[0]", err)
	}
	if _, serr := os.Stat(out); !os.IsNotExist(serr) {
		ents, _ := os.ReadDir(out)
		t.Errorf("refused run left %s behind (%d entries)", out, len(ents))
	}
	o.AllowLabelChange = true
	sum, err := Run(context.Background(), o)
	if err != nil {
		t.Fatalf("Run with AllowLabelChange: %v", err)
	}
	if sum.Copies == 0 {
		t.Errorf("AllowLabelChange run made no copies: %+v", sum)
	}
	labVerify(t, out)
	d, err := manifest.ReadDataset(out)
	if err != nil {
		t.Fatal(err)
	}
	if d.Augment == nil || !d.Augment.AllowedChanges {
		t.Errorf("dataset.json does not record allow_label_change: %+v", d.Augment)
	}
}
