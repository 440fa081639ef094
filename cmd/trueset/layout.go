package main

import (
	"github.com/spf13/pflag"

	"github.com/trueset/trueset/manifest"
)

// layoutFlags are --layout and --pack-size, shared by the commands that
// write a dataset.
type layoutFlags struct {
	layout   string
	packSize string
}

func (l *layoutFlags) bind(f *pflag.FlagSet, def string) {
	f.StringVar(&l.layout, "layout", def, "how samples are stored: folder (one PNG per file) or packed (tar archives per split, for streaming)")
	f.StringVar(&l.packSize, "pack-size", "", "packed layout: the most bytes one pack (tar file) may take, e.g. 64MiB or 1GiB (default 256MiB)")
}

// resolve checks the flags; it returns the layout and the pack bound (0
// for the folder layout).
func (l *layoutFlags) resolve() (string, int64, error) {
	switch l.layout {
	case manifest.LayoutFolder:
		return l.layout, 0, nil
	case manifest.LayoutPacked:
	default:
		return "", 0, usagef("--layout %q: want %s or %s", l.layout, manifest.LayoutFolder, manifest.LayoutPacked)
	}
	if l.packSize == "" {
		return l.layout, manifest.DefaultPackBytes, nil
	}
	n, err := manifest.ParseSize(l.packSize)
	if err != nil {
		return "", 0, usagef("--pack-size: %v", err)
	}
	if n < manifest.MinPackBytes {
		return "", 0, usagef("--pack-size %s: a pack may not be bounded below %d bytes (64KiB)", l.packSize, manifest.MinPackBytes)
	}
	return l.layout, n, nil
}
