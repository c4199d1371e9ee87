/*
 * capture/render.h - exact area coverage of polygons on the pixel grid, and
 * a Gaussian blur of a float plane: the two steps that turn a part outline
 * into an anti-aliased image.
 *
 * Coverage: pixel (i, j) is the unit square [i - 0.5, i + 0.5) x
 * [j - 0.5, j + 0.5) (pixel centres at integers, x right, y down). Its
 * coverage is the exact fraction of that square inside the polygons added,
 * computed analytically (no supersampling), so the sum of the coverage of
 * all pixels equals the polygon area to rounding. Outlines of one part are
 * added together: holes must run the other way round from the outer edge
 * (signed areas of opposite sign), as the synthetic generator makes them.
 *
 * A coverage plane covers a rectangle of the image (a window); edges outside
 * the window are handled exactly, so a part cut by the frame edge renders
 * correctly inside the frame.
 *
 * Nothing here allocates: the caller owns every buffer.
 */
#ifndef MB_RENDER_H
#define MB_RENDER_H

typedef struct {
    int x0, y0;        /**< image px of cell (0, 0) */
    int width, height; /**< cells (px) */
    int stride;        /**< floats from one row to the next, >= width + 2 */
    float *cells;      /**< height * stride floats, caller-owned */
} mb_coverage;

/**
 * Point the plane at a window of the image and zero it. cells must hold
 * height * (width + 2) floats; the stride is set to width + 2.
 */
void mb_coverage_reset(mb_coverage *c, float *cells, int x0, int y0, int width,
                       int height);

/**
 * Accumulate one closed polygon of n points (interleaved x, y in image px;
 * the last point joins the first). n < 3 adds nothing.
 */
void mb_coverage_add(mb_coverage *c, const double *xy, int n);

/**
 * Turn the accumulated edges into coverage: afterwards cells[y * stride + x]
 * is the covered fraction (0..1) of image pixel (x0 + x, y0 + y).
 * Call once, after the last mb_coverage_add.
 */
void mb_coverage_resolve(mb_coverage *c);

/** Floats of work space mb_blur_gauss needs for a width x height plane. */
int mb_blur_work_size(int width, int height);

/**
 * Blur a float plane in place with a sampled, normalised Gaussian of
 * standard deviation sigma (px), truncated at 3 sigma, separable. Values
 * beyond the border repeat the border value. sigma <= 0 does nothing.
 * work: mb_blur_work_size(width, height) floats.
 */
void mb_blur_gauss(float *plane, int width, int height, int stride,
                   double sigma, float *work);

/** Signed area of a closed polygon (shoelace; positive when the points run
    counter-clockwise in x right, y up axes). */
double mb_polygon_area(const double *xy, int n);

#endif
