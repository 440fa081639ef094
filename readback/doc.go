// Package readback reads back one batch as a user's training pipeline fed it
// to the model — a NumPy .npz file of sample ids, images and optionally
// masks and targets — and, because the dataset's truth is known, names
// what the pipeline got wrong.
//
// Contract:
//
//   - Input: a trueset dataset folder in either layout (read through package
//     manifest; its sample files through manifest.OpenSample) and
//     one .npz file (NumPy's documented NPZ format: a zip archive of .npy
//     arrays, read with codeberg.org/sbinet/npyio). Every file is opened
//     through internal/safefile; the archive's entries, their uncompressed
//     sizes, each array's header and its shape × dtype size are bounded
//     before anything is allocated (see Limits). Object (pickled) arrays
//     are refused without being unpickled.
//   - Arrays: "ids" (strings: record ids; integers: record indices),
//     "images" (N×C×H×W, N×H×W×C or N×H×W, any integer or float dtype),
//     optionally "masks" (N×H×W) and one array per target named as the
//     dataset names it (N values). Other arrays are listed and ignored.
//   - Output: a Report — the inferred layout, the per-sample relations
//     found, and Findings, each with a Kind from the documented list (see
//     Kinds), a Severity (info, warning, error), the sample ids concerned,
//     evidence numbers and a message that says what to fix. Run never
//     writes anything; the caller draws the contact sheet from Report.Panels.
//   - A batch that cannot be read or understood (unknown ids, an array of
//     the wrong length, a layout that cannot be told) is an *InputError;
//     anything found wrong with the pipeline is a Finding, never an error.
//   - Deterministic: the same dataset and batch give the same Report,
//     whatever Options.Workers is.
//
// It imports, of ours, only manifest and internal/safefile.
package readback
