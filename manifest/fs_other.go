//go:build !unix

package manifest

// writeFileAtomic has no fast path here; writeAtomic takes the reference one.
func writeFileAtomic(path string, b []byte) (ok bool, err error) { return false, nil }
