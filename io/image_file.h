/*
 * io/image_file.h - grey image files: PGM natively, PNG through libpng.
 *
 * Reading (the format is found from the first bytes, never the name):
 *   PGM  "P5" binary, maxval 1..65535: one byte per sample up to 255, two
 *        bytes big-endian above (netpbm's rule). "P2" plain (ASCII) too.
 *        Samples are scaled to 8 bits as round(v * 255 / maxval), computed
 *        (v * 255 + maxval / 2) / maxval in integers; so a 16-bit frame
 *        loses its low bits, and an 8-bit file with maxval 255 is copied
 *        unchanged. A sample above maxval is a format error. Comments
 *        ('#' to the end of the line) are allowed in the header. Data after
 *        the first image is ignored.
 *   PNG  any colour type and bit depth, converted by libpng to 8-bit grey:
 *        palette expanded, 1/2/4-bit grey expanded, 16-bit scaled to 8
 *        (png_set_scale_16: round(v * 255 / 65535)), alpha dropped (the
 *        colour under it is kept), interlacing undone, colour turned to
 *        grey here with the Rec. 601 luma weights 0.299 R + 0.587 G +
 *        0.114 B, rounded (the weights of OpenCV's grey conversion; done
 *        here because libpng's own conversion truncates). No gamma
 *        correction: samples are taken as they are stored.
 * Images larger than MB_IMAGE_MAX_SIDE in either direction are refused
 * before any pixel memory is allocated.
 *
 * Writing: 8-bit grey PGM (P5, maxval 255), 8-bit grey PNG, and 8-bit RGB
 * PNG (for overlays). Writers create the file directly (no temporary); a
 * failed write removes the half-written file.
 *
 * Every function takes a caller-owned err (MB_ERR_LEN bytes, may be NULL)
 * and writes one sentence naming the file and what was wrong.
 */
#ifndef MB_IMAGE_FILE_H
#define MB_IMAGE_FILE_H

#include <stddef.h>
#include <stdint.h>

#include "image.h"

/** Largest width or height accepted when reading, px. */
#define MB_IMAGE_MAX_SIDE 16384

/**
 * Read a PGM or PNG file into a new image (mb_image_alloc; free with
 * mb_image_free).
 * Return value: 0; MB_ENOTFOUND (no such file); MB_EIO (unreadable);
 * MB_EFORMAT (neither PGM nor PNG, a malformed header, truncated or
 * corrupt data); MB_ERANGE (an image larger than MB_IMAGE_MAX_SIDE);
 * MB_ENOMEM. On failure *out is zeroed.
 */
int mb_image_load(const char *path, mb_image *out, char *err);

/** The same from len bytes in memory; `name` is used in sentences. */
int mb_image_decode(const uint8_t *buf, size_t len, const char *name,
                    mb_image *out, char *err);

/** Only the PGM parser (P5 or P2), from memory. Same results. */
int mb_image_parse_pgm(const uint8_t *buf, size_t len, const char *name,
                       mb_image *out, char *err);

/** Only the PNG decoder, from memory. Same results. */
int mb_image_parse_png(const uint8_t *buf, size_t len, const char *name,
                       mb_image *out, char *err);

/**
 * Write img as binary PGM (P5, maxval 255).
 * Return value: 0; MB_EINVAL (no image); MB_EIO (cannot create or write).
 */
int mb_image_save_pgm(const char *path, const mb_image *img, char *err);

/**
 * Write img as an 8-bit grey PNG (zlib level 1, Sub filter: fast rather
 * than smallest; a noisy 1280 x 1024 frame in about 30 ms).
 * Return value: 0; MB_EINVAL; MB_EIO; MB_ENOMEM.
 */
int mb_image_save_png(const char *path, const mb_image *img, char *err);

/**
 * Write an 8-bit RGB PNG of w x h pixels; rgb holds R, G, B per pixel, row
 * y starting at rgb + y * stride (stride >= 3 * w bytes).
 * Return value: 0; MB_EINVAL; MB_EIO; MB_ENOMEM.
 */
int mb_image_save_png_rgb(const char *path, int w, int h, const uint8_t *rgb,
                          int stride, char *err);

/**
 * Write img as PNG when path ends in ".png" (any case), else as PGM.
 * Return value: as the writer used.
 */
int mb_image_save(const char *path, const mb_image *img, char *err);

#endif
