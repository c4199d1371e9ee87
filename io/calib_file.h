/*
 * io/calib_file.h - the calibration document: a JSON file (cJSON) a person
 * can read, holding a calibration/camera.h mb_calib.
 *
 * Layout (version 1):
 *   {
 *     "format": "modeband-calibration",
 *     "version": 1,
 *     "created": "2024-05-01T12:00:00Z",        UTC, may be ""
 *     "frame": { "width": W, "height": H },      px, frames it applies to
 *     "target": { "rows": R, "cols": C, "pitch_mm": p },
 *     "model": {
 *       "plane_to_image": [[h11, h12, h13], [h21, h22, h23], [h31, h32, 1]],
 *                 plane mm -> undistorted px, row by row, h33 = 1
 *       "distortion": { "centre_px": [cx, cy], "radius_px": rho,
 *                       "k1": .., "k2": .., "p1": .., "p2": .. }
 *     },
 *     "residuals": { "frames": F, "points_per_frame": N, "rms_px": ..,
 *                    "worst_px": .., "worst_frame": i, "worst_point": j,
 *                    "coverage": .., "iterations": n,
 *                    "frame_rms_px": [F values] },
 *     "poses": [ { "angle_deg": a, "shift_mm": [x, y] }, ... F ]
 *                 the target's pose on the plane in each frame: turned
 *                 by a relative to frame 1, its first dot at (x, y) mm
 *   }
 * Doubles are printed with up to 17 significant digits (io/json_util.h), so
 * a save/load round trip is bit-exact. worst_frame and worst_point are
 * 0-based (frame index, dot index row * cols + col).
 *
 * The reader refuses, with a sentence naming the file and the field:
 * another format or version (MB_EVERSION); a missing or mistyped field
 * (MB_EFORMAT); a wrong array length (MB_ESIZE); null or infinite numbers
 * (MB_ENUMERIC); a model mb_calib_validate refuses (its code, MB_ERANGE or
 * MB_ENUMERIC). Callers check the frame size with mb_calib_check_frame
 * (or mb_calib_file_load_for) before converting any pixel.
 */
#ifndef MB_CALIB_FILE_H
#define MB_CALIB_FILE_H

#include <stddef.h>

#include "camera.h"

#define MB_CALIB_FORMAT "modeband-calibration"
#define MB_CALIB_VERSION 1

/**
 * The document's text, in a malloc'd NUL-terminated buffer *text of *len
 * bytes that the caller frees.
 * Return value: 0; MB_EINVAL; MB_ENUMERIC (a value is not finite); the
 * code of mb_calib_validate; MB_ENOMEM.
 */
int mb_calib_file_print(const mb_calib *cal, char **text, size_t *len,
                        char *err);

/**
 * Write the document to path (path.tmp, fsync, rename: a crash never
 * leaves half a file). Return value: as mb_calib_file_print; MB_EIO. err
 * names the file.
 */
int mb_calib_file_save(const char *path, const mb_calib *cal, char *err);

/** Read a document from a buffer; `name` is used in sentences. On failure
 *cal is zeroed. Codes: see the file comment; MB_ENOMEM. */
int mb_calib_file_parse(const char *text, size_t len, const char *name,
                        mb_calib *cal, char *err);

/** Read a document from path. Codes as mb_calib_file_parse, plus
    MB_ENOTFOUND and MB_EIO. */
int mb_calib_file_load(const char *path, mb_calib *cal, char *err);

/**
 * Read a document and check that it applies to width x height frames.
 * Return value: as mb_calib_file_load; MB_ESIZE (another frame size, the
 * sentence names the file and both sizes).
 */
int mb_calib_file_load_for(const char *path, int width, int height,
                           mb_calib *cal, char *err);

#endif
