/*
 * fit/image.h - 8-bit grey images as strided views.
 *
 * A view does not own its pixels unless it came from mb_image_alloc. Pixel
 * (x, y) is pixels[y * stride + x]; x right, y down, pixel centres at
 * integer coordinates. A view may wrap a V4L2 mmap buffer or a sub-rectangle
 * of another image: nothing is copied silently.
 */
#ifndef MB_IMAGE_H
#define MB_IMAGE_H

#include <stdint.h>

typedef struct {
    int width;       /**< px */
    int height;      /**< px */
    int stride;      /**< bytes from one row to the next, >= width */
    uint8_t *pixels; /**< first pixel of the first row */
} mb_image;

/**
 * Allocate a width x height image. The stride is padded to a multiple of 64
 * bytes so that every row starts on a cache line (row-wise filters then never
 * split a line between rows). Pixels are zeroed.
 * Return value: 0, MB_EINVAL for a non-positive or oversized size,
 * MB_ENOMEM. On failure *out is zeroed.
 */
int mb_image_alloc(int width, int height, mb_image *out);

/** Free pixels obtained from mb_image_alloc and zero the view. NULL-safe. */
void mb_image_free(mb_image *img);

/** A view of the rectangle (x, y, w, h) of img; clipped to img. No copy. */
mb_image mb_image_view(const mb_image *img, int x, int y, int w, int h);

#endif
