/* fit/image.c - allocation and views of grey images. */
#include "image.h"

#include "error.h"

#include <stdlib.h>
#include <string.h>

int mb_image_alloc(int width, int height, mb_image *out)
{
    if (!out)
        return MB_EINVAL;
    memset(out, 0, sizeof *out);
    if (width <= 0 || height <= 0 || width > 65536 || height > 65536)
        return MB_EINVAL;
    int stride = (width + 63) & ~63;
    uint8_t *p = calloc((size_t)stride * (size_t)height, 1);
    if (!p)
        return MB_ENOMEM;
    out->width = width;
    out->height = height;
    out->stride = stride;
    out->pixels = p;
    return MB_OK;
}

void mb_image_free(mb_image *img)
{
    if (!img)
        return;
    free(img->pixels);
    memset(img, 0, sizeof *img);
}

mb_image mb_image_view(const mb_image *img, int x, int y, int w, int h)
{
    mb_image v = {0, 0, 0, NULL};
    if (!img || !img->pixels)
        return v;
    if (x < 0) {
        w += x;
        x = 0;
    }
    if (y < 0) {
        h += y;
        y = 0;
    }
    if (x + w > img->width)
        w = img->width - x;
    if (y + h > img->height)
        h = img->height - y;
    if (w <= 0 || h <= 0)
        return v;
    v.width = w;
    v.height = h;
    v.stride = img->stride;
    v.pixels = img->pixels + (size_t)y * (size_t)img->stride + (size_t)x;
    return v;
}
