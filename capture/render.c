/*
 * capture/render.c - exact polygon coverage by signed-area accumulation, and
 * a separable Gaussian blur.
 *
 * Coverage. For a closed polygon, the area of a pixel inside it equals the
 * sum, over the polygon's edges, of the signed area between each edge and
 * the pixel's right border, clipped to the pixel's rows (Green's theorem
 * applied per cell). So every edge piece that crosses a cell row adds, to
 * the cell it passes through, dy * (right border - mean x of the piece), and
 * adds its whole dy to every cell further right. The second part is stored
 * as a difference (one entry in the next cell) and a prefix sum along the
 * row resolves it. Edges are split where they cross a cell border, so each
 * piece lies in one cell and the formula is exact: the coverage sums to the
 * polygon area to floating-point rounding.
 *
 * Blur: sampled Gaussian, normalised to sum 1, truncated at 3 sigma,
 * vertical pass then horizontal pass.
 */
#include "render.h"

#include <math.h>
#include <string.h>

/* Largest blur radius in px (sigma is capped at MAX_SIGMA). */
#define MAX_SIGMA 10.0
#define MAX_RADIUS 30

void mb_coverage_reset(mb_coverage *c, float *cells, int x0, int y0, int width,
                       int height)
{
    c->x0 = x0;
    c->y0 = y0;
    c->width = width > 0 ? width : 0;
    c->height = height > 0 ? height : 0;
    c->stride = c->width + 2;
    c->cells = cells;
    if (c->height > 0)
        memset(cells, 0, sizeof(float) * (size_t)c->stride * (size_t)c->height);
}

/* One piece of an edge inside one cell row, from u = ua to u = ub (cell
   units, 0 <= u <= width), covering signed height h of the row. */
static void add_span(float *row, int width, double ua, double ub, double h)
{
    if (ua > ub) {
        double t = ua;
        ua = ub;
        ub = t;
    }
    if (ua < 0)
        ua = 0;
    if (ub > width)
        ub = width;
    if (ua > ub)
        ua = ub;
    int ia = (int)floor(ua), ib = (int)floor(ub);
    if (ia >= width) { /* beyond the last cell: affects no visible cell */
        row[width] += (float)h;
        return;
    }
    if (ia == ib || ub - ua < 1e-12) {
        double fm = 0.5 * (ua + ub) - ia;
        row[ia] += (float)(h * (1.0 - fm));
        row[ia + 1] += (float)(h * fm);
        return;
    }
    /* The piece crosses cell borders: its height is spread evenly over u. */
    double k = h / (ub - ua);
    double hh = (ia + 1 - ua) * k, fm = 0.5 * (ua + ia + 1) - ia;
    row[ia] += (float)(hh * (1.0 - fm));
    row[ia + 1] += (float)(hh * fm);
    for (int i = ia + 1; i < ib; i++) {
        row[i] += (float)(0.5 * k);
        row[i + 1] += (float)(0.5 * k);
    }
    hh = (ub - ib) * k;
    fm = 0.5 * (ub - ib);
    row[ib] += (float)(hh * (1.0 - fm));
    row[ib + 1] += (float)(hh * fm);
}

/* An edge piece with u inside [0, width] (clamped by the caller). */
static void add_piece(mb_coverage *c, double u0, double v0, double u1,
                      double v1)
{
    if (v0 == v1)
        return;
    double dir = 1.0;
    if (v0 > v1) {
        double t = u0;
        u0 = u1;
        u1 = t;
        t = v0;
        v0 = v1;
        v1 = t;
        dir = -1.0;
    }
    double dudv = (u1 - u0) / (v1 - v0);
    int r0 = (int)floor(v0), r1 = (int)ceil(v1);
    if (r0 < 0)
        r0 = 0;
    if (r1 > c->height)
        r1 = c->height;
    for (int r = r0; r < r1; r++) {
        double va = v0 > r ? v0 : r, vb = v1 < r + 1 ? v1 : r + 1;
        if (vb <= va)
            continue;
        double ua = u0 + (va - v0) * dudv, ub = u0 + (vb - v0) * dudv;
        add_span(c->cells + (size_t)r * (size_t)c->stride, c->width, ua, ub,
                 dir * (vb - va));
    }
}

/* An edge in cell units: split where it crosses u = 0 or u = width, so
   that each part lies inside the window or wholly to one side of it (where
   it acts as a vertical edge on the window border). */
static void add_edge(mb_coverage *c, double u0, double v0, double u1, double v1)
{
    double w = c->width, ts[4];
    int nt = 0;
    ts[nt++] = 0.0;
    if ((u0 < 0) != (u1 < 0))
        ts[nt++] = (0 - u0) / (u1 - u0);
    if ((u0 > w) != (u1 > w))
        ts[nt++] = (w - u0) / (u1 - u0);
    if (nt == 3 && ts[1] > ts[2]) {
        double t = ts[1];
        ts[1] = ts[2];
        ts[2] = t;
    }
    ts[nt++] = 1.0;
    for (int k = 0; k + 1 < nt; k++) {
        double ta = ts[k], tb = ts[k + 1];
        double ua = u0 + ta * (u1 - u0), va = v0 + ta * (v1 - v0);
        double ub = u0 + tb * (u1 - u0), vb = v0 + tb * (v1 - v0);
        if (k == 0) {
            ua = u0;
            va = v0;
        }
        if (k + 2 == nt) {
            ub = u1;
            vb = v1;
        }
        ua = ua < 0 ? 0 : (ua > w ? w : ua);
        ub = ub < 0 ? 0 : (ub > w ? w : ub);
        add_piece(c, ua, va, ub, vb);
    }
}

void mb_coverage_add(mb_coverage *c, const double *xy, int n)
{
    if (!c || !xy || n < 3 || c->width <= 0 || c->height <= 0)
        return;
    /* Cell (0, 0) spans image [x0 - 0.5, x0 + 0.5) x [y0 - 0.5, y0 + 0.5). */
    double ox = 0.5 - c->x0, oy = 0.5 - c->y0;
    double pu = xy[2 * (n - 1)] + ox, pv = xy[2 * (n - 1) + 1] + oy;
    for (int i = 0; i < n; i++) {
        double u = xy[2 * i] + ox, v = xy[2 * i + 1] + oy;
        add_edge(c, pu, pv, u, v);
        pu = u;
        pv = v;
    }
}

void mb_coverage_resolve(mb_coverage *c)
{
    for (int y = 0; y < c->height; y++) {
        float *row = c->cells + (size_t)y * (size_t)c->stride;
        float acc = 0.0f;
        for (int x = 0; x < c->width; x++) {
            acc += row[x];
            float v = fabsf(acc);
            row[x] = v > 1.0f ? 1.0f : v;
        }
        row[c->width] = row[c->width + 1] = 0.0f;
    }
}

int mb_blur_work_size(int width, int height)
{
    return width * height + width + 2 * MAX_RADIUS + 2;
}

static int make_kernel(double sigma, float *k)
{
    if (sigma > MAX_SIGMA)
        sigma = MAX_SIGMA;
    int r = (int)ceil(3.0 * sigma);
    if (r < 1)
        r = 1;
    double sum = 0.0, w[2 * MAX_RADIUS + 1];
    for (int i = -r; i <= r; i++) {
        w[i + r] = exp(-0.5 * (double)(i * i) / (sigma * sigma));
        sum += w[i + r];
    }
    for (int i = 0; i <= 2 * r; i++)
        k[i] = (float)(w[i] / sum);
    return r;
}

void mb_blur_gauss(float *plane, int width, int height, int stride,
                   double sigma, float *work)
{
    if (sigma <= 0 || width <= 0 || height <= 0)
        return;
    float k[2 * MAX_RADIUS + 1];
    int r = make_kernel(sigma, k);
    float *tmp = work, *pad = work + (size_t)width * (size_t)height;
    /* vertical pass: plane -> tmp (stride width) */
    for (int y = 0; y < height; y++) {
        float *out = tmp + (size_t)y * (size_t)width;
        for (int x = 0; x < width; x++)
            out[x] = 0.0f;
        for (int i = -r; i <= r; i++) {
            int yy = y + i < 0 ? 0 : (y + i >= height ? height - 1 : y + i);
            const float *in = plane + (size_t)yy * (size_t)stride;
            float w = k[i + r];
            for (int x = 0; x < width; x++)
                out[x] += w * in[x];
        }
    }
    /* horizontal pass: tmp -> plane, through a padded row */
    for (int y = 0; y < height; y++) {
        const float *in = tmp + (size_t)y * (size_t)width;
        for (int x = -r; x < width + r; x++)
            pad[x + r] = in[x < 0 ? 0 : (x >= width ? width - 1 : x)];
        float *out = plane + (size_t)y * (size_t)stride;
        /* tap by tap across the row (vectorises), each sum in the same
           order as a tap loop per pixel would add it */
        for (int x = 0; x < width; x++)
            out[x] = 0.0f;
        for (int i = 0; i <= 2 * r; i++) {
            const float *p = pad + i;
            float w = k[i];
            for (int x = 0; x < width; x++)
                out[x] += w * p[x];
        }
    }
}

double mb_polygon_area(const double *xy, int n)
{
    double a = 0.0;
    for (int i = 0, j = n - 1; i < n; j = i++)
        a += xy[2 * j] * xy[2 * i + 1] - xy[2 * i] * xy[2 * j + 1];
    return 0.5 * a;
}
