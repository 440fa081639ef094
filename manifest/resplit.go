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
	tmp, err := os.CreateTemp(dir, "."+ManifestFile+".tmp*")
	if err != nil {
		return nil, err
	}
	defer os.Remove(tmp.Name())
	bw := bufio.NewWriterSize(tmp, 1<<16)
	sum := sha256.New()
	err = ReadManifest(dir, func(r *Record) error {
		g := groupIdx[r.Group]
		r.Split = o.Splits.Names[a.Split[g]]
		r.Stratum = keys[g]
		t.Counts[r.Split]++
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
