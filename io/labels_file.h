/*
 * io/labels_file.h - ground-truth labels of synthetic frames, as JSON Lines:
 * one JSON object per line, one line per frame, written by `modeband synth`
 * beside the frames and read back by the tests.
 *
 * Every line is complete in itself (version 1):
 *   { "format": "modeband-labels", "version": 1,
 *     "image": "ring_0001.pgm",           file name, relative to the labels
 *     "family": "ring", "part": "RG-4030",
 *     "seed": "1", "index": 0, "shot": 0, seed as a decimal string (64 bits)
 *     "width": 1280, "height": 1024, "mm_per_px": 0.1,
 *     "lighting": "back", "noise": 2, "blur": 1,
 *     "grey": { "part": 22, "background": 215 },
 *     "present": true, "in_view": true, "good": true,
 *     "pose": { "x": px, "y": px, "angle_deg": deg, "size": factor },
 *     "defect": { "type": "none" | "nick" | ..., "size_mm", "extent_mm",
 *                 "outline": index or -1, "arc": 0..1 or -1,
 *                 "angle_deg", "x": px, "y": px },
 *     "outlines": [ [[x, y], ...], ... ] }   image px, outer edge first
 * Coordinates are image px (x right, y down, pixel centres at integers),
 * rounded to 1e-4 px; angles in degrees (atan2 in image axes). The pose maps
 * the part frame (mm) to px: rotation angle_deg, scale 1 / mm_per_px,
 * translation (x, y); "size" is the part's size factor (1 = nominal).
 * See capture/synth.h for what each defect's size means.
 */
#ifndef MB_LABELS_FILE_H
#define MB_LABELS_FILE_H

#include <stddef.h>

#include "synth.h"

#define MB_LABELS_FORMAT "modeband-labels"
#define MB_LABELS_VERSION 1

/** Longest image name stored in a label, with its NUL. */
#define MB_LABEL_NAME_LEN 256

typedef struct mb_labels_writer mb_labels_writer;
typedef struct mb_labels_reader mb_labels_reader;

/** One record read back. */
typedef struct {
    char image[MB_LABEL_NAME_LEN]; /**< as written */
    int line;                      /**< line number in the file, from 1 */
    mb_synth_truth truth;          /**< outlines.xy is owned by the reader
                                        and valid until its next call */
} mb_label;

/**
 * Create (truncate) a labels file.
 * Return value: 0; MB_EINVAL; MB_EIO (cannot create); MB_ENOMEM.
 */
int mb_labels_writer_open(const char *path, mb_labels_writer **out, char *err);

/**
 * Append the record of one frame. image: its file name as the reader should
 * see it (shorter than MB_LABEL_NAME_LEN).
 * Return value: 0; MB_EINVAL; MB_EIO (write failed); MB_ENOMEM.
 */
int mb_labels_write(mb_labels_writer *w, const char *image,
                    const mb_synth_truth *t, char *err);

/**
 * Flush and close. NULL-safe (returns 0).
 * Return value: 0; MB_EIO when buffered data could not be written.
 */
int mb_labels_writer_close(mb_labels_writer *w, char *err);

/**
 * Open a labels file for reading.
 * Return value: 0; MB_ENOTFOUND; MB_EIO; MB_ENOMEM.
 */
int mb_labels_reader_open(const char *path, mb_labels_reader **out, char *err);

/**
 * Read the next record (blank lines are skipped).
 * Return value: 1 with *out filled; 0 at the end of the file; MB_EFORMAT
 * (malformed line, missing or mistyped field: the sentence names the file,
 * the line and the field; a torn last line is reported the same way);
 * MB_EVERSION (another format or version); MB_ENUMERIC; MB_EIO; MB_ENOMEM.
 */
int mb_labels_read(mb_labels_reader *r, mb_label *out, char *err);

/** Close a reader. NULL-safe. */
void mb_labels_reader_close(mb_labels_reader *r);

#endif
