/*
 * fit/pyramid.h - Gaussian image pyramid of a frame, and sampling of grey
 * levels and gradients at real coordinates.
 *
 * Level 0 is the frame itself (a view, not a copy). Level L+1 is level L
 * smoothed with the 5-tap binomial kernel [1 4 6 4 1]/16 along x and along y
 * and then decimated by 2: it keeps the samples at even columns and rows of
 * the smoothed level, so
 *
 *     P[L+1](i, j) = round( sum_{a,b=-2..2} k[a] k[b] P[L](2i+a, 2j+b) / 256 )
 *
 * with k = {1, 4, 6, 4, 1}, rows and columns outside the level replaced by
 * the nearest edge row or column (clamping; scipy.ndimage mode "nearest"),
 * and round(v / 256) computed exactly in integers as (v + 128) >> 8. Level
 * sizes: w[L+1] = (w[L] + 1) / 2, h[L+1] = (h[L] + 1) / 2 (integer division).
 *
 * Coordinates between levels. Pixel centres are at integer coordinates on
 * every level (x right, y down). Because level L+1's sample i sits on level
 * L's sample 2i, a point with full-resolution (level 0) coordinates (x0, y0)
 * has level-L coordinates
 *
 *     xL = x0 / 2^L,    yL = y0 / 2^L        (and back: x0 = xL * 2^L)
 *
 * with no half-pixel offset. (That offset, (x0 + 0.5) / 2^L - 0.5, belongs to
 * pyramids that average 2x2 blocks; this one does not.)
 *
 * The workspace is made once for a frame size; mb_pyramid_build allocates
 * nothing. One pyramid serves one thread.
 */
#ifndef MB_PYRAMID_H
#define MB_PYRAMID_H

#include "image.h"

/** Most levels a pyramid may have (level 0 included). */
#define MB_PYRAMID_MAX_LEVELS 8

typedef struct mb_pyramid mb_pyramid;

/**
 * Make a pyramid workspace for width x height frames with `levels` levels
 * (level 0 included: 4 levels means scales 1, 1/2, 1/4, 1/8). Allocates every
 * level except level 0.
 * Return value: 0; MB_EINVAL for a NULL out, levels outside
 * 1..MB_PYRAMID_MAX_LEVELS or a size outside 1..65536; MB_ENOMEM. On failure
 * *out is NULL.
 */
int mb_pyramid_create(int width, int height, int levels, mb_pyramid **out);

/**
 * Fill every level from frame. Level 0 becomes a view of frame's pixels: the
 * frame must stay alive and unchanged while the pyramid is used. Allocates
 * nothing.
 * Return value: 0; MB_EINVAL for NULL arguments or a frame without pixels;
 * MB_ESIZE when the frame's size is not the one the pyramid was made for.
 */
int mb_pyramid_build(mb_pyramid *pyr, const mb_image *frame);

/**
 * Choose the kernels: on (the default) uses 32-byte vectors when the CPU
 * has them (AVX2 on x86), off the 16-byte ones every supported CPU has.
 * Both make the same levels to the bit; this exists so that tests can
 * compare them and benchmarks time both.
 * Return value: 1 when the 32-byte kernels are now in use, else 0 (also
 * for a NULL pyr).
 */
int mb_pyramid_use_wide(mb_pyramid *pyr, int on);

/** Free the workspace. NULL-safe. */
void mb_pyramid_close(mb_pyramid *pyr);

/** Number of levels (level 0 included). */
int mb_pyramid_levels(const mb_pyramid *pyr);

/**
 * View of level `level` (0 .. levels-1), owned by the pyramid; its pixels
 * are valid after mb_pyramid_build until the next build or close. Returns
 * NULL for a level out of range.
 */
const mb_image *mb_pyramid_level(const mb_pyramid *pyr, int level);

/**
 * Grey level of img at the real point (x, y) by bilinear interpolation of
 * the four surrounding pixels. Points outside the image take the value of
 * the nearest edge (coordinates clamped to [0, w-1] x [0, h-1]; the same as
 * scipy.ndimage.map_coordinates with order=1, mode="nearest").
 * img must be a valid view (not checked: this is an inner-loop call).
 */
double mb_pyramid_sample(const mb_image *img, double x, double y);

/**
 * Grey-level gradient of img at the real point (x, y), in grey levels per
 * pixel of that image: the central differences
 *     gx(i, j) = (I(i+1, j) - I(i-1, j)) / 2,  gy(i, j) = (I(i, j+1) - I(i,
 * j-1)) / 2 at the four surrounding pixels (with I clamped to the nearest edge
 * pixel outside the image), interpolated bilinearly as in mb_pyramid_sample. gx
 * and gy must not be NULL; img must be a valid view.
 */
void mb_pyramid_gradient(const mb_image *img, double x, double y, double *gx,
                         double *gy);

#endif
