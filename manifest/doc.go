// Package manifest is the vocabulary every other trueset package speaks: the
// label schema (Record, Object, targets, class table), the dataset's on-disk
// layout (dataset.json, manifest.jsonl, images/, masks/, instances/), the PNG
// and checksum conventions, and split allocation.
//
// Contract:
//   - Pixel (x, y) covers [x, x+1) × [y, y+1); boxes are [x0, y0, x1, y1] with
//     x1 and y1 exclusive, computed from mask pixels.
//   - Class id 0 is background. Semantic masks are 8-bit indexed PNGs whose
//     palette is the class colors; instance masks are 16-bit gray PNGs whose
//     value is the instance id (0 = none).
//   - Records are written one JSON object per line in index order. Every path
//     in a record is relative to the dataset folder and never leaves it.
//   - Encoding is deterministic: the same records give the same bytes.
//
// manifest imports no other trueset package.
package manifest
