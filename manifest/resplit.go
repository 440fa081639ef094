package manifest

import (
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"os"
	"path/filepath"
)

// ResplitOptions configures Resplit.
type ResplitOptions struct {
	Seed            uint64
	Splits          Splits
	Stratify        string
	RequireCoverage bool
}

// Resplit re-deals an existing dataset's groups to splits without touching
// pixels. A group's stratum is that of its first record. It streams the
// manifest twice (once to collect groups, once to rewrite) and replaces
// manifest.jsonl and dataset.json so that no reader sees a complete-looking
// mix: dataset.json is removed first, the new manifest is renamed into place,
// and dataset.json is written last.
func Resplit(dir string, o ResplitOptions) (*SplitTable, error) {
	d, err := ReadDataset(dir)
	if err != nil {
		return nil, err
	}
	inst, err := ReadInstruments(d.Recipe)
	if err != nil {
		return nil, err
	}
	mpath := filepath.Join(dir, ManifestFile)
	groupIdx := map[string]int{}
	var keys []string
	err = ReadManifest(dir, func(r *Record) error {
		if _, ok := groupIdx[r.Group]; ok {
			return nil
		}
		k, err := StratumOf(r, o.Stratify)
		if err != nil {
			return err
		}
		if inst.HoldOut != nil && r.HeldOut != "" {
			k = HeldOutPrefix + r.HeldOut // held-out samples stay in the hold-out splits
		}
		groupIdx[r.Group] = len(keys)
		keys = append(keys, k)
		return nil
	})
	if err != nil {
		return nil, err
	}
	o.Splits.Cover = o.RequireCoverage
	var a *Allocation
	if inst.HoldOut != nil {
		ids, names := StrataIDs(keys)
		a, err = AllocateHeldOut(o.Seed, ids, names, o.Splits, inst.HoldOut.Splits)
	} else {
		a, err = AllocateStrata(o.Seed, keys, o.Splits)
	}
	if err != nil {
		return nil, err
	}
	t := &SplitTable{Names: o.Splits.Names, Spec: o.Splits.String(), Ratios: map[string]float64{}, Counts: map[string]int{},
		Stratify: o.Stratify, Strata: a.Table, Thin: a.Thin, RequireCoverage: o.RequireCoverage}
	for i, n := range o.Splits.Names {
		t.Ratios[n] = Round(o.Splits.Ratios[i], 6)
		t.Counts[n] = 0
	}
	if o.RequireCoverage {
		if err := a.CheckCoverage(o.Splits); err != nil {
			return t, fmt.Errorf("%w; nothing was changed", err)
		}
	}
	resplit := func(r *Record) {
		g := groupIdx[r.Group]
		r.Split = o.Splits.Names[a.Split[g]]
		r.Stratum = keys[g]
		t.Counts[r.Split]++
	}
	if d.Layout != nil {
		if err := resplitPacked(dir, d, t, resplit); err != nil {
			return nil, err
		}
		return t, nil
	}
	tmp, err := os.CreateTemp(dir, "."+ManifestFile+".tmp*")
	if err != nil {
		return nil, err
	}
	defer os.Remove(tmp.Name())
	bw := bufio.NewWriterSize(tmp, 1<<16)
	sum := sha256.New()
	err = ReadManifest(dir, func(r *Record) error {
		resplit(r)
		b, err := MarshalRecord(r)
		if err != nil {
			return err
		}
		b = append(b, '\n')
		sum.Write(b)
		_, err = bw.Write(b)
		return err
	})
	if err == nil {
		err = bw.Flush()
	}
	if err == nil {
		err = tmp.Sync()
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return nil, fmt.Errorf("rewrite %s: %w; nothing was changed", mpath, err)
	}
	d.Splits = *t
	d.ManifestSHA256 = hex.EncodeToString(sum.Sum(nil))
	db, err := MarshalDataset(d)
	if err != nil {
		return nil, err
	}
	if err := os.Remove(filepath.Join(dir, DatasetFile)); err != nil {
		return nil, err
	}
	if err := os.Rename(tmp.Name(), mpath); err != nil {
		return nil, fmt.Errorf("replace %s: %w (dataset.json removed; rerun split)", mpath, err)
	}
	if err := WriteFileAtomic(filepath.Join(dir, DatasetFile), db); err != nil {
		return nil, err
	}
	return t, nil
}

// resplitPacked re-splits a dataset in the packed layout. Its packs are per
// split and each holds its records' manifest lines, so they are written
// again: into a new folder inside dir (through a packed Writer with dir's
// pack bound; every sample file read with ReadSample and checked against
// its record's SHA-256), which then takes the place of packs/ and
// manifest.jsonl, dataset.json removed first and written last as in the
// folder layout. The result is the folder layout's re-split converted to
// packed with the same bound. It needs room for a second copy of the packs
// while it runs.
func resplitPacked(dir string, d *Dataset, t *SplitTable, resplit func(*Record)) error {
	work, err := os.MkdirTemp(dir, ".resplit-*")
	if err != nil {
		return err
	}
	keep := false // a swap that failed half-way leaves the new packs for the user
	defer func() {
		if !keep {
			os.RemoveAll(work)
		}
	}()
	w, err := CreateWith(work, CreateOptions{Layout: LayoutPacked, PackBytes: d.Layout.PackBytes})
	if err != nil {
		return err
	}
	err = ReadManifest(dir, func(r *Record) error {
		for _, k := range [3][2]string{{"image", r.Image}, {"mask", r.Mask}, {"instances", r.Instances}} {
			b, err := ReadSample(dir, k[1])
			if err != nil {
				return fmt.Errorf("record %s: %w", r.ID, err)
			}
			if got := SHA256Hex(b); got != r.SHA256[k[0]] {
				return fmt.Errorf("record %s: %s: SHA-256 %s, the record says %q; run trueset verify %s", r.ID, k[1], got, r.SHA256[k[0]], dir)
			}
			if err := w.WriteRaw(k[1], b); err != nil {
				return err
			}
		}
		resplit(r)
		return w.Append(r)
	})
	if err != nil {
		w.Abort()
		return fmt.Errorf("%w; nothing was changed", err)
	}
	nd := *d
	nd.Splits = *t
	if _, err := w.Finish(&nd); err != nil {
		return fmt.Errorf("%w; nothing was changed", err)
	}
	if err := os.Remove(filepath.Join(dir, DatasetFile)); err != nil {
		return err
	}
	old := filepath.Join(work, "old-"+PacksDir)
	for _, mv := range [][2]string{
		{filepath.Join(dir, PacksDir), old},
		{filepath.Join(work, PacksDir), filepath.Join(dir, PacksDir)},
		{filepath.Join(work, ManifestFile), filepath.Join(dir, ManifestFile)},
		{filepath.Join(work, DatasetFile), filepath.Join(dir, DatasetFile)},
	} {
		if err := os.Rename(mv[0], mv[1]); err != nil {
			keep = true
			return fmt.Errorf("replace %s: %w (dataset.json removed; the new packs are in %s)", mv[1], err, work)
		}
	}
	return nil
}
