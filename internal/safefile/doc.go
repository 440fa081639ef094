// Package safefile is the one place trueset opens an input file: it opens
// only regular files (a named pipe, a device or a socket is refused without
// blocking, whatever Stat says of its size) and reads at most a stated
// number of bytes of each. Every reader of recipes, plans, fonts, labels
// tables, class tables, manifests and images goes through Open or Read.
//
// It imports nothing of ours.
package safefile
