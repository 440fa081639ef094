package augment

import (
	"errors"
	"fmt"
	"path/filepath"

	"github.com/trueset/trueset/internal/safefile"
	"github.com/trueset/trueset/manifest"
)

// CheckReadingCuts refuses, before any work, the drop policy for a plan
// that could cut an object a text or number target reads: dropping a cut
// glyph would shorten the reading while the image still shows part of it.
// A move could cut when it is a crop, a turn that does not grow the canvas,
// or a warp that zooms in, shifts or slants.
func CheckReadingCuts(p *Plan, defs []manifest.TargetDef) error {
	if p.Geometry.Cuts.Policy != "drop" {
		return nil
	}
	reads := ""
	for _, d := range defs {
		if d.Kind == "text" || d.Kind == "number" {
			reads = d.Name
			break
		}
	}
	if reads == "" {
		return nil
	}
	var find func(steps []Step, path string) string
	find = func(steps []Step, path string) string {
		for i := range steps {
			s := &steps[i]
			sp := fmt.Sprintf("%s[%d]", path, i)
			if *s.Chance == 0 {
				continue
			}
			if s.Do == "pick" {
				if at := find(s.From, sp+".from"); at != "" {
					return at
				}
				continue
			}
			if moveCouldCut(s) {
				return fmt.Sprintf("%s (%s)", sp, s.Do)
			}
		}
		return ""
	}
	if at := find(p.Geometry.Moves, "geometry.moves"); at != "" {
		return usageErrorf("plan geometry.cuts.policy drop: %s could cut an object that target %q reads, and dropping it would shorten the reading while the image still shows part of the glyph; use policy redraw (copies that cut a read object are drawn again, and not written if no draw keeps it whole)", at, reads)
	}
	return nil
}

func moveCouldCut(s *Step) bool {
	nonzero := func(r *Range) bool { return r != nil && (r.Min != 0 || r.Max != 0) }
	switch s.Do {
	case "crop":
		return true
	case "rotate":
		return !s.GrowCanvas && nonzero(s.Angle)
	case "warp":
		return (s.Zoom != nil && s.Zoom.Max > 1) || nonzero(s.Shift) || nonzero(s.Slant)
	}
	return false
}

// errEnough stops reading a manifest early.
var errEnough = errors.New("enough")

// readKept calls fn with the first records of the output's manifest.jsonl
// until fn returns errEnough.
func readKept(dir string, fn func(r *manifest.Record) error) error {
	p := filepath.Join(dir, manifest.ManifestFile)
	f, err := safefile.Open(p)
	if err != nil {
		return err
	}
	defer f.Close()
	err = manifest.DecodeManifest(f, p, fn)
	if errors.Is(err, errEnough) {
		return nil
	}
	return err
}

// keptSources finds, for --resume, which sources the first n intact records
// of the output hold in full. Records come source by source (the original,
// then its copies; a copy that was not written leaves a gap), so the last
// original among them starts a source that may be incomplete: it is made
// again. It returns that source's job number and the records before it.
func keptSources(dir string, in *input, n int) (job, keep int) {
	j, pos, p := -1, 0, 0
	readKept(dir, func(r *manifest.Record) error {
		if p >= n {
			return errEnough
		}
		if j+1 < len(in.srcs) && r.ID == in.srcs[j+1].rec.ID {
			j++
			pos = p
		}
		p++
		return nil
	})
	if j < 0 {
		return 0, 0
	}
	return j, pos
}

// keptStats counts, for --resume, what the sources before job did to their
// copies, from their records in the output: the copies written, redrawn,
// with dropped objects and marked stale; the rest of each source's planned
// copies were not written.
func keptStats(dir string, in *input, job int, first []int) ([]jobStats, error) {
	out := make([]jobStats, job)
	j := -1
	err := readKept(dir, func(r *manifest.Record) error {
		if j+1 < len(in.srcs) && r.ID == in.srcs[j+1].rec.ID {
			j++
			if j >= job {
				return errEnough
			}
			out[j] = jobStats{records: 1}
			out[j].fb.Planned = first[j+1] - first[j] - 1
			return nil
		}
		if j < 0 || r.Lineage == nil {
			return fmt.Errorf("%s: record %s is not where --resume expects it; start again with --force", dir, r.ID)
		}
		st := &out[j]
		st.records++
		st.fb.Written++
		if c := r.Lineage.Cuts; c != nil {
			if c.Redraws > 0 {
				st.fb.Redrawn++
			}
			if c.Dropped > 0 {
				st.fb.Dropped++
				st.fb.DroppedObjects += c.Dropped
			}
		}
		if len(r.StaleTargets) > 0 {
			st.fb.Stale++
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	for i := range out {
		out[i].fb.NotWritten = out[i].fb.Planned - out[i].fb.Written
	}
	return out, nil
}
