package augment

import (
	"bytes"
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"github.com/trueset/trueset/manifest"
)

// The lineage a copy's record carries, as manifest.jsonl holds it: source,
// geometry and pixels (each entry {"do": <the plan's name>, drawn parameters
// inline with their JSON types}), the composed matrix, and what the cuts
// policy did.

const linPlan = `name: lineage
geometry:
  cuts: {policy: keep}
  moves:
    - {do: flip, axis: vertical}
    - {do: rotate, angle: [-20, 20]}
    - {do: warp, zoom: [0.9, 1.1], shift: [-2, 2], slant: [-3, 3]}
    - {do: crop, area: [0.6, 0.9], to: [30, 28]}
    - do: pick
      from:
        - {do: resize, to: [32, 32]}
        - {do: flip, axis: horizontal}
pixels:
  - do: pick
    from:
      - {do: gaussian-noise, sigma: 2}
      - {do: blur, sigma: 0.5}
    odds: [1, 1]
  - {do: cutout, count: 2, size: 4, tone: 9, classes: ignore}
  - {do: jpeg, quality: 80}
  - {do: hue, angle: 5}
`

func TestLineageJSONShape(t *testing.T) {
	p := labParsePlan(t, linPlan)
	ops := map[string]bool{}
	for _, op := range opNames() {
		ops[op] = true
	}
	picked := map[string]bool{}
	for s, in := range labSources() {
		for k := 1; k <= 6; k++ {
			out, err := p.Copy(in, 4, s, k, labDefs)
			if err != nil {
				t.Fatal(err)
			}
			what := fmt.Sprintf("%s copy %d", in.Record.ID, k)
			b, err := json.Marshal(out.Record.Lineage)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.HasPrefix(b, []byte(`{"source":"`+in.Record.ID+`","geometry":[{"do":"flip","axis":"vertical"},{"do":"rotate","angle":`)) {
				t.Errorf("%s: lineage starts %.120s", what, b)
			}
			for _, old := range []string{`"ops"`, `"op"`, `"params"`, `"affine"`, `flip-vertical`, `"expand"`, `"degrees"`, `"output`, `"cut-policy"`} {
				if bytes.Contains(b, []byte(old)) {
					t.Errorf("%s: lineage holds %s: %s", what, old, b)
				}
			}
			var lin struct {
				Source   string
				Geometry []map[string]any
				Pixels   []map[string]any
				Matrix   []float64
				Cuts     any
			}
			dec := json.NewDecoder(bytes.NewReader(b))
			dec.DisallowUnknownFields()
			if err := dec.Decode(&lin); err != nil {
				t.Fatalf("%s: %v\n%s", what, err, b)
			}
			if len(lin.Matrix) != 6 || lin.Cuts != nil {
				t.Errorf("%s: matrix %v, cuts %v (policy keep: none)", what, lin.Matrix, lin.Cuts)
			}
			if len(lin.Geometry) < 4 || len(lin.Pixels) != 4 {
				t.Errorf("%s: %d moves and %d pixel steps, want at least 4 and 4", what, len(lin.Geometry), len(lin.Pixels))
			}
			for i, e := range append(lin.Geometry, lin.Pixels...) {
				do, _ := e["do"].(string)
				if !ops[do] || do == "pick" {
					t.Errorf("%s: entry %d has do %v, not a plan step", what, i, e["do"])
				}
				if pk, ok := e["pick"]; ok {
					if f, isNum := pk.(float64); !isNum || (f != 0 && f != 1) {
						t.Errorf("%s: %s pick %v", what, do, pk)
					}
					picked[do] = true
				}
				switch do {
				case "rotate":
					if g, ok := e["grow_canvas"].(bool); !ok || g {
						t.Errorf("%s: rotate grow_canvas %#v, want false", what, e["grow_canvas"])
					}
				case "flip":
					if a := e["axis"]; a != "vertical" && a != "horizontal" {
						t.Errorf("%s: flip axis %#v", what, a)
					}
				case "crop":
					if fmt.Sprint(e["to"]) != "[30 28]" {
						t.Errorf("%s: crop to %v", what, e["to"])
					}
				case "warp":
					if sh, ok := e["shift"].([]any); !ok || len(sh) != 2 {
						t.Errorf("%s: warp shift %#v, want [x, y]", what, e["shift"])
					}
				case "cutout":
					if e["classes"] != "ignore" || e["count"] != 2.0 || e["tone"] != 9.0 {
						t.Errorf("%s: cutout %v", what, e)
					}
				case "hue":
					if in.Image.C == 1 && e["skipped_gray"] != true {
						t.Errorf("%s: hue on a gray image without skipped_gray: true: %v", what, e)
					}
				case "jpeg":
					if e["quality"] != 80.0 {
						t.Errorf("%s: jpeg %v", what, e)
					}
				}
			}
			// Read back, the lineage marshals to the same bytes.
			var back manifest.Lineage
			if err := json.Unmarshal(b, &back); err != nil {
				t.Fatal(err)
			}
			if again, _ := json.Marshal(&back); !bytes.Equal(again, b) {
				t.Errorf("%s: lineage round trip:\n%s\n%s", what, b, again)
			}
		}
	}
	for _, do := range []string{"resize", "flip", "gaussian-noise", "blur"} {
		if !picked[do] {
			t.Errorf("no copy records %s chosen by a pick", do)
		}
	}
}

// The cuts policy's bookkeeping: a copy drawn again records how often; one
// that ran out of tries records how many objects it dropped.
func TestLineageCuts(t *testing.T) {
	p := labEveryStep(t)
	redrawn, dropped := 0, 0
	for _, tries := range []int{30, 1} {
		p.Geometry.Cuts.Tries = tries
		for s, in := range labSources() {
			for k := 1; k <= 40; k++ {
				out, err := p.Copy(in, 12, s, k, labDefs)
				if err != nil {
					t.Fatal(err)
				}
				c := out.Record.Lineage.Cuts
				if c == nil {
					continue
				}
				b, _ := json.Marshal(out.Record.Lineage)
				if !strings.Contains(string(b), fmt.Sprintf(`"cuts":{"redraws":%d,"dropped":%d}`, c.Redraws, c.Dropped)) {
					t.Errorf("lineage %s", b)
				}
				if c.Redraws > 0 {
					redrawn++
				}
				if c.Dropped > 0 {
					dropped++
					if n := len(in.Record.Objects) - len(out.Record.Objects); n < c.Dropped {
						t.Errorf("cuts.dropped %d but the copy has %d of %d objects", c.Dropped, len(out.Record.Objects), len(in.Record.Objects))
					}
				}
			}
		}
	}
	if redrawn == 0 || dropped == 0 {
		t.Errorf("%d copies redrawn, %d dropped objects; the test needs both", redrawn, dropped)
	}
}

// A copy that keeps no object writes "objects": [], not null.
func TestNoObjectsLeftIsAnEmptyList(t *testing.T) {
	for _, doc := range []string{
		// Everything shifted out of the frame.
		"name: away\ngeometry:\n  cuts: {policy: keep}\n  moves: [{do: warp, shift: 4000}]\n",
		// Every object cut below least_shown 1 by a small crop, and dropped.
		"name: drop\ngeometry:\n  cuts: {policy: drop, least_shown: 1}\n  moves: [{do: crop, size: 3, to: [30, 30]}]\n",
		// Every object hidden by a cutout as large as the image.
		"name: hide\npixels: [{do: cutout, size: 4096, classes: ignore}]\n",
	} {
		p := labParsePlan(t, doc)
		for s, in := range labSources() {
			out, err := p.Copy(in, 1, s, 1, labDefs)
			if err != nil {
				t.Fatal(err)
			}
			b, err := manifest.MarshalRecord(&out.Record)
			if err != nil {
				t.Fatal(err)
			}
			if len(out.Record.Objects) != 0 || !bytes.Contains(b, []byte(`"objects":[]`)) {
				t.Errorf("%s, %s: %d objects left; record %s", p.Name, in.Record.ID, len(out.Record.Objects), b)
			}
		}
	}
}

// manifest.LineageOp reads what it writes, keeping the parameters' order
// and JSON types, and refuses what is not a step.
func TestLineageOpJSON(t *testing.T) {
	const doc = `{"do":"cutout","pick":1,"count":1,"tone":9.5,"classes":"ignore","rects":[{"center":[0.25,0.5],"height":3,"width":4}],"skipped_gray":true}`
	var op manifest.LineageOp
	if err := json.Unmarshal([]byte(doc), &op); err != nil {
		t.Fatal(err)
	}
	if op.Do != "cutout" || op.Pick == nil || *op.Pick != 1 || op.Num("tone") != 9.5 || op.Str("classes") != "ignore" || !op.Bool("skipped_gray") {
		t.Errorf("read %+v", op)
	}
	rects, err := CutoutRects(&op)
	if err != nil || len(rects) != 1 || rects[0] != (Rect{U: 0.25, V: 0.5, W: 4, H: 3}) {
		t.Errorf("rects %+v, %v", rects, err)
	}
	if b, err := json.Marshal(op); err != nil || string(b) != doc {
		t.Errorf("wrote %s (%v), want %s", b, err, doc)
	}
	for _, bad := range []string{`[]`, `{"sigma":1}`, `{"do":"blur","do":"gamma"}`, `{"do":"blur","pick":"one"}`} {
		var op manifest.LineageOp
		if err := json.Unmarshal([]byte(bad), &op); err == nil {
			t.Errorf("%s read as %+v", bad, op)
		}
	}
}
