// Package inspect looks at a finished dataset before training: statistics a
// training run needs (normalization, class weights, target scales, object
// sizes and counts), a leakage check across splits, contact sheets, and a
// self-contained HTML report. It reads datasets only through package
// manifest and writes nothing into them.
package inspect
