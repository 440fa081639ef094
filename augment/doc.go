// Package augment will hold label-preserving augmentation: 2×3 affine
// composition of geometric steps, warp kernels (bilinear and bicubic for
// images, nearest-neighbour for masks under the same matrix and the pixel-centre
// convention of package manifest), photometric and noise steps that never touch
// masks, augmentation plan files, label recomputation from the warped masks,
// per-class invariance rules, and readers for plain labeled folders.
//
// It is empty for now; it imports manifest only and never gen.
package augment
