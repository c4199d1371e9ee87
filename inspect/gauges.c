/* inspect/gauges.c - drawing gauges on measured outlines (see gauges.h). */
#include "gauges.h"

#include "error.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

int mb_gauge_circle(const double *xy, int n, double *cx, double *cy, double *r)
{
    if (n < 3)
        return MB_EDEGENERATE;
    /* centre the data for conditioning, then solve the 3x3 normal equations
       of [x y 1] [D E F]^T = -(x^2 + y^2) */
    double mx = 0, my = 0;
    for (int i = 0; i < n; i++) {
        mx += xy[2 * i];
        my += xy[2 * i + 1];
    }
    mx /= n;
    my /= n;
    double a[9] = {0}, v[3] = {0};
    for (int i = 0; i < n; i++) {
        double x = xy[2 * i] - mx, y = xy[2 * i + 1] - my, z = x * x + y * y;
        double row[3] = {x, y, 1.0};
        for (int p = 0; p < 3; p++) {
            for (int q = 0; q < 3; q++)
                a[3 * p + q] += row[p] * row[q];
            v[p] -= row[p] * z;
        }
    }
    /* Cramer's rule on the symmetric 3x3 system */
    double det = a[0] * (a[4] * a[8] - a[5] * a[7]) -
                 a[1] * (a[3] * a[8] - a[5] * a[6]) +
                 a[2] * (a[3] * a[7] - a[4] * a[6]);
    double scale = a[0] * a[4] * a[8];
    if (!(fabs(det) > 1e-12 * fabs(scale)) || !isfinite(det))
        return MB_EDEGENERATE;
    double s[3];
    for (int c = 0; c < 3; c++) {
        double m[9];
        memcpy(m, a, sizeof m);
        for (int p = 0; p < 3; p++)
            m[3 * p + c] = v[p];
        s[c] = (m[0] * (m[4] * m[8] - m[5] * m[7]) -
                m[1] * (m[3] * m[8] - m[5] * m[6]) +
                m[2] * (m[3] * m[7] - m[4] * m[6])) / det;
    }
    double r2 = (s[0] * s[0] + s[1] * s[1]) / 4.0 - s[2];
    if (!(r2 > 0))
        return MB_EDEGENERATE;
    *cx = mx - s[0] / 2.0;
    *cy = my - s[1] / 2.0;
    *r = sqrt(r2);
    return MB_OK;
}

static double cross(const double *o, const double *a, const double *b)
{
    return (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0]);
}

static int cmp_pt(const void *pa, const void *pb)
{
    const double *a = pa, *b = pb;
    if (a[0] != b[0])
        return a[0] < b[0] ? -1 : 1;
    return (a[1] > b[1]) - (a[1] < b[1]);
}

int mb_gauge_calipers(const double *xy, int n, double *wmin, double *wmax,
                      double *work)
{
    if (n < 3)
        return MB_EDEGENERATE;
    double *pts = work, *hull = work + 2 * n;
    memcpy(pts, xy, (size_t)2 * n * sizeof *pts);
    qsort(pts, (size_t)n, 2 * sizeof *pts, cmp_pt);
    /* monotone chain over the sorted copy; the hull is kept as indices
       (at most n + 1 ints, which fit in the n doubles after the copy) */
    int *idx = (int *)hull;
    int h = 0;
    for (int i = 0; i < n; i++) {
        while (h >= 2 && cross(pts + 2 * idx[h - 2], pts + 2 * idx[h - 1], pts + 2 * i) <= 0)
            h--;
        idx[h++] = i;
    }
    for (int i = n - 2, lo = h + 1; i >= 0; i--) {
        while (h >= lo && cross(pts + 2 * idx[h - 2], pts + 2 * idx[h - 1], pts + 2 * i) <= 0)
            h--;
        idx[h++] = i;
    }
    h--; /* last point equals the first */
    if (h < 3)
        return MB_EDEGENERATE;
    double best_min = INFINITY, best_max = 0.0;
    for (int e = 0; e < h; e++) {
        const double *a = pts + 2 * idx[e], *b = pts + 2 * idx[(e + 1) % h];
        double ex = b[0] - a[0], ey = b[1] - a[1], len = hypot(ex, ey);
        if (len <= 0)
            continue;
        double far = 0.0;
        for (int j = 0; j < h; j++) {
            const double *p = pts + 2 * idx[j];
            double d = fabs(ex * (p[1] - a[1]) - ey * (p[0] - a[0])) / len;
            if (d > far)
                far = d;
            double dd = hypot(p[0] - a[0], p[1] - a[1]);
            if (dd > best_max)
                best_max = dd;
        }
        if (far < best_min)
            best_min = far;
    }
    *wmin = best_min;
    *wmax = best_max;
    return MB_OK;
}

double mb_gauge_area(const double *xy, int n, double *cx, double *cy)
{
    double a2 = 0, sx = 0, sy = 0;
    for (int i = 0; i < n; i++) {
        int j = (i + 1) % n;
        double c = xy[2 * i] * xy[2 * j + 1] - xy[2 * j] * xy[2 * i + 1];
        a2 += c;
        sx += (xy[2 * i] + xy[2 * j]) * c;
        sy += (xy[2 * i + 1] + xy[2 * j + 1]) * c;
    }
    if (cx && cy && a2 != 0) {
        *cx = sx / (3.0 * a2);
        *cy = sy / (3.0 * a2);
    }
    return fabs(a2) / 2.0;
}

double mb_gauge_length(const double *xy, int n)
{
    double s = 0;
    for (int i = 0; i < n; i++) {
        int j = (i + 1) % n;
        s += hypot(xy[2 * j] - xy[2 * i], xy[2 * j + 1] - xy[2 * i + 1]);
    }
    return s;
}

int mb_gauge_measure(const mb_gauge_def *g, const mb_layout *layout,
                     const double *xy, double *work, double *value)
{
    if (!g || !layout || g->a < 0 || g->a >= layout->n_outlines)
        return MB_EINVAL;
    const double *pa = xy + 2 * mb_layout_first(layout, g->a);
    int na = layout->counts[g->a];
    double cx, cy, r, w0, w1, bx, by;
    int rc;
    switch (g->kind) {
    case MB_GAUGE_DIAMETER:
        if ((rc = mb_gauge_circle(pa, na, &cx, &cy, &r)) < 0)
            return rc;
        *value = 2.0 * r;
        return MB_OK;
    case MB_GAUGE_WIDTH_MIN:
    case MB_GAUGE_WIDTH_MAX:
        if ((rc = mb_gauge_calipers(pa, na, &w0, &w1, work)) < 0)
            return rc;
        *value = g->kind == MB_GAUGE_WIDTH_MIN ? w0 : w1;
        return MB_OK;
    case MB_GAUGE_SPACING:
        if (g->b < 0 || g->b >= layout->n_outlines)
            return MB_EINVAL;
        mb_gauge_area(pa, na, &cx, &cy);
        mb_gauge_area(xy + 2 * mb_layout_first(layout, g->b),
                      layout->counts[g->b], &bx, &by);
        *value = hypot(bx - cx, by - cy);
        return MB_OK;
    case MB_GAUGE_LENGTH:
        *value = mb_gauge_length(pa, na);
        return MB_OK;
    case MB_GAUGE_AREA:
        *value = mb_gauge_area(pa, na, NULL, NULL);
        return MB_OK;
    }
    return MB_EINVAL;
}

static const char *const kind_names[] = {
    "", "diameter", "width-min", "width-max", "spacing", "length", "area"};

const char *mb_gauge_kind_name(mb_gauge_kind k)
{
    return k >= MB_GAUGE_DIAMETER && k <= MB_GAUGE_AREA ? kind_names[k] : "?";
}

mb_gauge_kind mb_gauge_kind_from_name(const char *name)
{
    for (int k = MB_GAUGE_DIAMETER; k <= MB_GAUGE_AREA; k++)
        if (name && !strcmp(name, kind_names[k]))
            return (mb_gauge_kind)k;
    return (mb_gauge_kind)0;
}
