/* io/overlay.c - drawing an inspection over its frame (see overlay.h). */
#include "overlay.h"

#include "error.h"
#include "image_file.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct {
    uint8_t *rgb;
    int w, h, stride;
} canvas;

static void plot(canvas *c, int x, int y, const uint8_t col[3])
{
    if (x < 0 || y < 0 || x >= c->w || y >= c->h)
        return;
    uint8_t *p = c->rgb + (size_t)y * c->stride + 3 * (size_t)x;
    p[0] = col[0];
    p[1] = col[1];
    p[2] = col[2];
}

/* A line by stepping along its longer axis (points within one pixel). */
static void line(canvas *c, double x0, double y0, double x1, double y1,
                 const uint8_t col[3])
{
    double dx = x1 - x0, dy = y1 - y0;
    int steps = (int)ceil(fmax(fabs(dx), fabs(dy)));
    if (steps > 20000)
        return;
    for (int i = 0; i <= steps; i++) {
        double t = steps ? (double)i / steps : 0.0;
        plot(c, (int)lround(x0 + t * dx), (int)lround(y0 + t * dy), col);
    }
}

static void outline(canvas *c, const mb_layout *l, const double *xy,
                    const uint8_t col[3])
{
    int first = 0;
    for (int o = 0; o < l->n_outlines; o++) {
        int n = l->counts[o];
        for (int j = 0; j < n; j++) {
            const double *a = xy + 2 * (first + j);
            const double *b = xy + 2 * (first + (j + 1) % n);
            line(c, a[0], a[1], b[0], b[1], col);
        }
        first += n;
    }
}

static void ring(canvas *c, double cx, double cy, double r, const uint8_t col[3])
{
    int steps = (int)(2 * M_PI * r) + 8;
    for (int w = 0; w < 2; w++)
        for (int i = 0; i < steps; i++) {
            double a = 2 * M_PI * i / steps;
            plot(c, (int)lround(cx + (r + w) * cos(a)), (int)lround(cy + (r + w) * sin(a)), col);
        }
}

int mb_overlay_render(const mb_overlay *ov, uint8_t *rgb, int stride)
{
    if (!ov || !ov->frame || !ov->frame->pixels || !rgb)
        return MB_EINVAL;
    const mb_image *f = ov->frame;
    canvas c = {rgb, f->width, f->height, stride};
    for (int y = 0; y < f->height; y++) {
        const uint8_t *src = f->pixels + (size_t)y * f->stride;
        uint8_t *dst = rgb + (size_t)y * stride;
        for (int x = 0; x < f->width; x++)
            dst[3 * x] = dst[3 * x + 1] = dst[3 * x + 2] = src[x];
    }
    static const uint8_t model_col[3] = {70, 150, 255};
    static const uint8_t meas_col[3] = {0, 200, 140};
    static const uint8_t invalid_col[3] = {250, 210, 0};
    static const uint8_t mark_col[3] = {235, 40, 170};
    static const uint8_t band[3][3] = {{40, 170, 80}, {220, 50, 40}, {240, 170, 0}};
    if (ov->layout && ov->model_xy)
        outline(&c, ov->layout, ov->model_xy, model_col);
    if (ov->layout && ov->measured_xy) {
        outline(&c, ov->layout, ov->measured_xy, meas_col);
        for (int j = 0; ov->valid && j < ov->layout->n_points; j++)
            if (!ov->valid[j])
                ring(&c, ov->measured_xy[2 * j], ov->measured_xy[2 * j + 1], 2, invalid_col);
    }
    for (int i = 0; i < ov->n_marks; i++)
        ring(&c, ov->marks[i].x, ov->marks[i].y, fmax(6.0, ov->marks[i].radius), mark_col);
    int v = ov->verdict >= 1 && ov->verdict <= 3 ? ov->verdict - 1 : 2;
    int bh = f->height / 64 + 4;
    for (int y = 0; y < bh && y < f->height; y++)
        for (int x = 0; x < f->width; x++)
            plot(&c, x, y, band[v]);
    return MB_OK;
}

int mb_overlay_save(const char *path, const mb_overlay *ov, char *err)
{
    if (!path || !ov || !ov->frame)
        return mb_err_set(err, MB_EINVAL, "overlay: nothing to draw");
    int w = ov->frame->width, h = ov->frame->height;
    uint8_t *rgb = malloc((size_t)w * h * 3);
    if (!rgb)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory for the overlay", path);
    int rc = mb_overlay_render(ov, rgb, 3 * w);
    if (rc == 0)
        rc = mb_image_save_png_rgb(path, w, h, rgb, 3 * w, err);
    free(rgb);
    return rc;
}
