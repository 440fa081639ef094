// Package augment expands labeled datasets with label-preserving transforms:
// masks, boxes and counts move with the pixels.
//
// Contract:
//   - A plan (plan.go, schema/plan.schema.json) has two sections: geometry
//     (sampling, outside, cuts and the moves) and pixels. Each step applies
//     with a chance and draws its parameters from ranges; pick chooses one
//     of its steps by odds. Copy k of source s draws only from
//     manifest.RNG(seed, s, k, try), so output bytes do not depend on the
//     worker count.
//   - All moves of a copy (flip, rotate, warp, crop, resize) compose into one
//     2×3 matrix (affine.go) applied once (warp.go): the image by bilinear or
//     Keys bicubic sampling, the semantic and instance masks by nearest
//     neighbour under the same matrix. Every destination pixel center
//     (x+0.5, y+0.5) is mapped back to the source. Quarter turns and flips
//     use exact matrices, so they move pixels without resampling error. The
//     warps run fast kernels (warp_fast.go: raw planes, per-row terms, direct
//     taps inside, copies for quarter turns) that give the reference
//     kernels' values bit for bit.
//   - Pixel steps (photometric.go) run afterwards on the warped image in plan
//     order and never touch masks; cutout may mark its pixels "ignore"
//     (manifest.IgnoreID) when asked (classes: ignore).
//   - Labels are measured again from the warped instance mask (apply.go):
//     boxes, areas, shown shares, and every target with a definition
//     (targets.go). Objects a crop or turn cuts below cuts.least_shown are
//     avoided by drawing the copy again (redraw), or dropped — their pixels
//     become "ignore" and the counts fall — never kept silently.
//   - A copy never shortens a reading: a draw whose frame cuts an object a
//     text or number target reads is drawn again under every policy, and a
//     copy no draw keeps whole is not written; the drop policy is refused
//     for plans that could cut such objects (CheckReadingCuts).
//   - A plain folder's columns.json (columns.go) declares labels.csv
//     columns derived (recomputed from the masks, checked against every
//     source) or image properties (carried); undeclared columns are carried
//     only into copies that lost, cut or dropped no object, unless
//     RunOptions.AcceptStale (then the record lists them in stale_targets).
//     Every fallback is counted per source split (Summary.Fallbacks,
//     dataset.json augment.fallbacks).
//   - A class may declare which transforms keep its label (manifest.Class
//     Flip, MaxRotate); CheckInvariance refuses a plan that breaks one before
//     any work.
//   - Every copy records its lineage (manifest.Lineage): source id, the
//     applied steps of each section as {"do": <the plan's name>, drawn
//     parameters inline} (noise seeds included; "pick" names a pick's
//     choice), the composed matrix, and what the cuts policy did (redraws,
//     dropped), from which Rebuild rebuilds it exactly.
//   - Inputs are trueset datasets or plain labeled folders (folder.go). The
//     output is a trueset dataset; sources are carried over unchanged and
//     copies keep their source's split, group and stratum.
//   - No input is trusted (guard.go, run.go): every file is read through
//     internal/safefile (regular files only, bounded bytes); names from input
//     data pass manifest.SafeName, and clashes between sources and copies
//     (<id>-cNN) are refused before anything is written; trueset records are
//     checked as read (unique ids, known splits, PNG headers against their
//     sizes, the manifest checksum, the split table) and each file against
//     its SHA-256 and labels against its masks when used, so what augment
//     writes verifies; originals are written under their ids, never under a
//     record's paths. A run works on sources within RunPixels (a plain folder
//     is read one source at a time and again when produced), counts a JPEG's
//     scans before decoding it, and refuses a plan whose canvas can outgrow
//     MaxSide before writing. Refusals of the input are *InputError.
//
// augment imports manifest (and internal/yamlnode, internal/safefile) only,
// never gen.
package augment
