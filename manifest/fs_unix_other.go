//go:build unix && !linux

package manifest

// writeFileAtomic is writeAtomic's fast path: see writeExclRename.
func writeFileAtomic(path string, b []byte) (ok bool, err error) { return writeExclRename(path, b) }
