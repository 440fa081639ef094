// Package augment expands labeled datasets with label-preserving transforms:
// masks, boxes and counts move with the pixels.
//
// Contract:
//   - A plan (plan.go, schema/plan.schema.json) is an ordered list of steps,
//     each applied with a chance and drawing its parameters from ranges.
//     Copy k of source s draws only from manifest.RNG(seed, s, k, try), so
//     output bytes do not depend on the worker count.
//   - All geometric steps of a copy (flip, rotate, affine, crop, resize)
//     compose into one 2×3 matrix (affine.go) applied once (warp.go): the
//     image by bilinear or Keys bicubic interpolation, the semantic and
//     instance masks by nearest neighbour under the same matrix. Every
//     destination pixel center (x+0.5, y+0.5) is mapped back to the source.
//     Quarter turns and flips use exact matrices, so they move pixels
//     without resampling error. The warps run fast kernels (warp_fast.go:
//     raw planes, per-row terms, direct taps inside, copies for quarter
//     turns) that give the reference kernels' values bit for bit.
//   - Photometric steps (photometric.go) run afterwards on the warped image in
//     plan order and never touch masks; cutout may mark its pixels "ignore"
//     (manifest.IgnoreID) when asked.
//   - Labels are measured again from the warped instance mask (apply.go):
//     boxes, areas, visible shares, and every target with a definition
//     (targets.go). Objects a crop or turn cuts below cut.least_shown are
//     avoided by redrawing (resample), or dropped — their pixels become
//     "ignore" and the counts fall — never kept silently.
//   - A class may declare which transforms keep its label (manifest.Class
//     Flip, MaxRotate); CheckInvariance refuses a plan that breaks one before
//     any work.
//   - Every copy records its lineage: source id, each applied step with its
//     drawn parameters (noise seeds included) and the composed matrix, from
//     which Rebuild rebuilds it exactly.
//   - Inputs are trueset datasets or plain labeled folders (folder.go). The
//     output is a trueset dataset; sources are carried over unchanged and
//     copies keep their source's split, group and stratum.
//
// augment imports manifest (and internal/yamlnode) only, never gen.
package augment
