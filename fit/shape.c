/*
 * fit/shape.c - outline layouts and the algebra of 2-D similarity poses.
 *
 * A pose is the similarity x' = s R(a) x + t with s > 0 and R(a) a proper
 * rotation. Similarities form a group:
 *     inverse:  x = (1/s) R(-a) (x' - t)
 *     compose:  b(a(x)) = s_b s_a R(a_b + a_a) x + s_b R(a_b) t_a + t_b
 * (the similarity transforms of a point distribution model, Cootes, Taylor,
 * Cooper, Graham, CVIU 61(1), 1995, section 3).
 */
#include "shape.h"

#include "error.h"

#include <math.h>

int mb_layout_check(const mb_layout *layout)
{
    if (!layout || layout->n_outlines < 1 ||
        layout->n_outlines > MB_MAX_OUTLINES)
        return MB_EINVAL;
    long sum = 0;
    for (int i = 0; i < layout->n_outlines; i++) {
        if (layout->counts[i] < 3 || layout->counts[i] > MB_MAX_OUTLINE_POINTS)
            return MB_EINVAL;
        sum += layout->counts[i];
    }
    return sum == layout->n_points ? MB_OK : MB_EINVAL;
}

int mb_layout_first(const mb_layout *layout, int outline)
{
    if (!layout || outline < 0 || outline >= layout->n_outlines)
        return -1;
    int first = 0;
    for (int i = 0; i < outline; i++)
        first += layout->counts[i];
    return first;
}

mb_pose mb_pose_identity(void)
{
    mb_pose p = {0.0, 0.0, 1.0, 0.0};
    return p;
}

void mb_pose_apply(const mb_pose *pose, const double *src, int n, double *dst)
{
    double c = pose->scale * cos(pose->angle);
    double s = pose->scale * sin(pose->angle);
    for (int i = 0; i < n; i++) {
        double x = src[2 * i], y = src[2 * i + 1];
        dst[2 * i] = c * x - s * y + pose->tx;
        dst[2 * i + 1] = s * x + c * y + pose->ty;
    }
}

/* Angles are kept in [-pi, pi] so that composed poses stay comparable. */
static double wrap_angle(double a)
{
    return remainder(a, 2.0 * M_PI);
}

mb_pose mb_pose_invert(const mb_pose *pose)
{
    mb_pose inv;
    double k = 1.0 / pose->scale;
    double c = cos(pose->angle), s = sin(pose->angle);
    inv.scale = k;
    inv.angle = wrap_angle(-pose->angle);
    /* t' = -(1/s) R(-a) t */
    inv.tx = -k * (c * pose->tx + s * pose->ty);
    inv.ty = -k * (-s * pose->tx + c * pose->ty);
    return inv;
}

mb_pose mb_pose_compose(const mb_pose *b, const mb_pose *a)
{
    mb_pose r;
    double c = b->scale * cos(b->angle), s = b->scale * sin(b->angle);
    r.scale = b->scale * a->scale;
    r.angle = wrap_angle(b->angle + a->angle);
    r.tx = c * a->tx - s * a->ty + b->tx;
    r.ty = s * a->tx + c * a->ty + b->ty;
    return r;
}
