// Package export writes a finished trueset dataset in two interchange
// formats that detection and instance-segmentation training code commonly
// reads. It reads the dataset only through package manifest (dataset.json,
// manifest.jsonl and each record's instance mask, all bounded by
// internal/safefile through manifest's readers) and never changes it.
//
// Objects JSON (FormatObjectsJSON, one file): a JSON document with three
// lists. "images": one entry per sample with a whole-number "id" (1, 2, …
// in manifest order), "file_name" (the record's image path, relative to the
// dataset folder), "width" and "height", plus the trueset "sample_id" and
// "split". "annotations": one per object with pixels, with "id" (1, 2, …),
// "image_id", "category_id" (the trueset class id), "bbox" as [x, y,
// width, height] in pixels (x, y the top-left pixel edge: the record's
// box_x0y0x1y1 as [x0, y0, x1−x0, y1−y0]), "area" (the object's mask pixel
// count), "iscrowd" 0, "segmentation" and the trueset "instance_id".
// "categories": every class but background (0) and ignore (255), as "id"
// (the trueset class id), "name" and "supercategory" ("object").
//
// The segmentation is the object's pixels in the instance mask as a
// run-length encoding in its uncompressed form: {"size": [height, width],
// "counts": [n0, n1, n2, …]}, where the pixels are taken column by column
// (column-major: down the first column, then down the second, …) and the
// counts alternate between runs of pixels outside and inside the object,
// starting with outside (n0 may be 0); the counts sum to width × height.
//
// Center boxes (FormatCenterBoxes, a folder): labels/<stem>.txt for each
// sample's image images/<stem>.png, one line per object with pixels,
// "class cx cy w h" separated by single spaces: class is the 0-based index
// of the object's class among the exported classes (ascending trueset
// class id, background and ignore left out), cx, cy the box center and w, h
// its size, divided by the image width (cx, w) and height (cy, h) so that
// they lie in [0, 1]. A sample without objects gets an empty file.
// classes.txt names the classes, line i for index i. Numbers are written in
// the shortest decimal form that reads back as the same float64.
//
// Objects are exported from the instance mask, which must agree with the
// record: every object's box and area are measured again from the mask and
// compared with the record's, and every instance in the mask must belong to
// an object; a disagreement is an InputError naming the record (run trueset
// verify on the folder). Objects with no pixels are left out.
//
// Output is never half-written: the JSON file is streamed to a temporary
// file beside it and renamed into place; the center-boxes folder is locked
// (manifest.LockDir) while it is written, its labels are written into a
// temporary folder renamed to labels/ at the end, and classes.txt is
// written last. The output must not overlap the dataset folder
// (manifest.CheckDisjoint).
package export
