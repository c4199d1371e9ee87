/*
 * inspect/verdict.c - one frame from pixels to a verdict with reasons.
 *
 * The scores mirror the ones the limits were learned from (bands.c): the
 * measured outline is aligned to the model's mean by a similarity, projected
 * into the tangent space, and its mode values, T^2 and residual are those of
 * that projection; local deviations are the measured-minus-model distances
 * along the normals from the robust fit of the search (fit/asm.h), so a nick
 * does not drag the model along.
 */
#include "verdict.h"

#include "error.h"
#include "beyond.h"
#include "gauges.h"
#include "overlay.h"
#include "procrustes.h"
#include "pyramid.h"
#include "stats.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

struct mb_inspector {
    const mb_part_model *pm;
    mb_inspect_params p;
    int w, h, n, d, k;
    mb_pyramid *pyr;
    mb_locate *loc;
    mb_asm *search;
    double *y, *b, *z, *work, *mm_pts;
    /* the curve fit (see refit_curve) */
    double *target, *recon, *nrm, *cdist, *fwork, *bfit;
    uint8_t *cvalid;
    /* the dense samples (see local_at): per landmark, the refit model's
       offset from the search's along the normal and the limit's corner
       allowance; per outline, its first dense sample */
    double *delta, *relax;
    uint8_t *corner;
    int *dstart;
    double mean_cx, mean_cy;  /* centroid of the mean shape (model frame) */
    double *mean_angle;       /* n: angle of each landmark on the part, deg */
    mb_calib cal;             /* the calibration (p.calib points here) */
    mb_locate_result lr;      /* where look() found the part */
    int looked;               /* lr is of the frame in the pyramid */
    mb_image frame;           /* that frame (a view) */
};

static const char *const reason_names[] = {
    [MB_REASON_NONE] = "none",        [MB_REASON_NO_PART] = "no-part",
    [MB_REASON_OFF_EDGE] = "off-edge",[MB_REASON_TWO_PARTS] = "two-parts",
    [MB_REASON_NO_FIT] = "no-fit",    [MB_REASON_SIZE] = "size",
    [MB_REASON_MODE] = "mode",        [MB_REASON_SHAPE] = "shape",
    [MB_REASON_RESIDUAL] = "residual",[MB_REASON_NICK] = "nick",
    [MB_REASON_FLASH] = "flash",      [MB_REASON_GAP] = "gap",
    [MB_REASON_GAUGE] = "gauge",      [MB_REASON_DEFORM] = "deform",
    [MB_REASON_SPOT] = "spot",
    [MB_REASON_FRAME] = "frame",
    [MB_REASON_MODEL] = "model",      [MB_REASON_INTERNAL] = "internal",
};

const char *mb_reason_name(mb_reason_code c)
{
    if ((int)c >= 0 && (size_t)c < sizeof reason_names / sizeof reason_names[0] &&
        reason_names[c])
        return reason_names[c];
    return "unknown";
}

int mb_reason_located(mb_reason_code c)
{
    return c == MB_REASON_NICK || c == MB_REASON_FLASH || c == MB_REASON_GAP ||
           c == MB_REASON_DEFORM || c == MB_REASON_SPOT;
}

int mb_verdict_save_overlay(const mb_verdict *v, const mb_image *frame,
                            const char *path, double ring_px, char *err)
{
    mb_overlay_mark marks[MB_MAX_REASONS];
    int nm = 0;
    for (int i = 0; i < v->n_reasons; i++) {
        const mb_reason *r = &v->reasons[i];
        if (!mb_reason_located(r->code))
            continue;
        marks[nm].x = r->x;
        marks[nm].y = r->y;
        double mmpp = r->depth_px > 0 && r->depth_mm > 0 ? r->depth_mm / r->depth_px : 0;
        marks[nm].radius = ring_px > 0 ? ring_px
                                       : 10.0 + (mmpp > 0 ? r->extent_mm / mmpp / 2 : 0);
        nm++;
    }
    mb_overlay ov = {frame, v->measured ? v->layout : NULL, v->model_xy,
                     v->measured, v->valid, (int)v->verdict, marks, nm};
    return mb_overlay_save(path, &ov, err);
}

void mb_inspect_params_default(mb_inspect_params *p)
{
    memset(p, 0, sizeof *p);
    mb_asm_params_default(&p->search);
    mb_locate_params_default(&p->locate);
    p->gap_run = 3;
}

void mb_inspector_close(mb_inspector *ins)
{
    if (!ins)
        return;
    mb_asm_close(ins->search);
    mb_locate_close(ins->loc);
    mb_pyramid_close(ins->pyr);
    free(ins->y);
    free(ins->b);
    free(ins->z);
    free(ins->work);
    free(ins->mm_pts);
    free(ins->mean_angle);
    free(ins->target);
    free(ins->recon);
    free(ins->nrm);
    free(ins->cdist);
    free(ins->fwork);
    free(ins->bfit);
    free(ins->cvalid);
    free(ins->delta);
    free(ins->relax);
    free(ins->corner);
    free(ins->dstart);
    free(ins);
}

int mb_inspector_create(const mb_part_model *pm, const mb_inspect_params *p,
                        mb_inspector **out, char *err)
{
    if (!pm || !out)
        return mb_err_set(err, MB_EINVAL, "inspector: no model");
    *out = NULL;
    if (!pm->shape || !pm->profiles)
        return mb_err_set(err, MB_EINVAL,
                          "the model has no grey-level profiles (it was taught "
                          "from point files); teach it from images to inspect");
    if (!pm->has_limits)
        return mb_err_set(err, MB_EINVAL, "the model has no acceptance limits");
    if (pm->imaging.width <= 0 || pm->imaging.height <= 0)
        return mb_err_set(err, MB_EINVAL, "the model does not say its frame size");
    mb_inspector *ins = calloc(1, sizeof *ins);
    if (!ins)
        return mb_err_set(err, MB_ENOMEM, "out of memory");
    int rc;
    ins->pm = pm;
    if (p)
        ins->p = *p;
    else
        mb_inspect_params_default(&ins->p);
    if (ins->p.calib) {
        /* Copied, so the caller's need not outlive the inspector. */
        ins->cal = *ins->p.calib;
        ins->p.calib = &ins->cal;
        if ((rc = mb_calib_check_frame(&ins->cal, pm->imaging.width,
                                       pm->imaging.height, err)) < 0)
            goto fail;
        mb_calib_scale sc;
        if (!(ins->p.mm_per_px > 0) &&
            mb_calib_local_scale(&ins->cal, (pm->imaging.width - 1) / 2.0,
                                 (pm->imaging.height - 1) / 2.0, &sc) == 0)
            ins->p.mm_per_px = sc.mm_per_px;
    }
    if (!(ins->p.mm_per_px > 0))
        ins->p.mm_per_px = pm->imaging.mm_per_px;
    ins->w = pm->imaging.width;
    ins->h = pm->imaging.height;
    ins->n = mb_shape_model_layout(pm->shape)->n_points;
    ins->d = 2 * ins->n;
    ins->k = mb_shape_model_n_modes(pm->shape);
    int levels = mb_profile_model_params(pm->profiles)->levels;
    if (ins->p.locate.level + 1 > levels)
        levels = ins->p.locate.level + 1;
    int maxc = 0;
    const mb_layout *l = mb_shape_model_layout(pm->shape);
    for (int o = 0; o < l->n_outlines; o++)
        if (l->counts[o] > maxc)
            maxc = l->counts[o];
    ins->y = malloc((size_t)ins->d * sizeof *ins->y);
    ins->b = malloc((size_t)(ins->k + 1) * sizeof *ins->b);
    ins->z = malloc((size_t)(ins->k + 1) * sizeof *ins->z);
    ins->work = malloc((size_t)(3 * maxc + 8) * sizeof *ins->work);
    ins->mm_pts = malloc((size_t)ins->d * sizeof *ins->mm_pts);
    ins->mean_angle = malloc((size_t)ins->n * sizeof *ins->mean_angle);
    ins->target = malloc((size_t)ins->d * sizeof *ins->target);
    ins->recon = malloc((size_t)ins->d * sizeof *ins->recon);
    ins->nrm = malloc((size_t)ins->d * sizeof *ins->nrm);
    ins->cdist = malloc((size_t)ins->n * sizeof *ins->cdist);
    ins->fwork = malloc((size_t)mb_shape_model_fit_work_size(pm->shape) * sizeof *ins->fwork);
    ins->bfit = malloc((size_t)(ins->k + 1) * sizeof *ins->bfit);
    ins->cvalid = malloc((size_t)ins->n);
    ins->delta = malloc((size_t)ins->n * sizeof *ins->delta);
    ins->relax = malloc((size_t)ins->n * sizeof *ins->relax);
    ins->corner = malloc((size_t)ins->n);
    ins->dstart = malloc((size_t)(l->n_outlines + 1) * sizeof *ins->dstart);
    if (!ins->y || !ins->b || !ins->z || !ins->work || !ins->mm_pts ||
        !ins->mean_angle || !ins->target || !ins->recon || !ins->nrm ||
        !ins->cdist || !ins->fwork || !ins->bfit || !ins->cvalid ||
        !ins->delta || !ins->relax || !ins->corner || !ins->dstart) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory");
        goto fail;
    }
    if ((rc = mb_pyramid_create(ins->w, ins->h, levels, &ins->pyr)) < 0) {
        mb_err_set(err, rc, "cannot make the image pyramid: %s", mb_strerror(rc));
        goto fail;
    }
    if ((rc = mb_locate_create(pm->shape, pm->profiles, ins->w, ins->h,
                               &ins->p.locate, &ins->loc, err)) < 0 ||
        (rc = mb_asm_create(pm->shape, pm->profiles, ins->w, ins->h,
                            &ins->p.search, &ins->search, err)) < 0)
        goto fail;
    const double *mean = mb_shape_model_mean(pm->shape);
    double cx = 0, cy = 0;
    for (int j = 0; j < ins->n; j++) {
        cx += mean[2 * j];
        cy += mean[2 * j + 1];
    }
    ins->mean_cx = cx / ins->n;
    ins->mean_cy = cy / ins->n;
    for (int j = 0; j < ins->n; j++) {
        double a = atan2(mean[2 * j + 1] - ins->mean_cy, mean[2 * j] - ins->mean_cx) *
                   180.0 / M_PI;
        ins->mean_angle[j] = a < 0 ? a + 360.0 : a;
    }
    *out = ins;
    return MB_OK;
fail:
    mb_inspector_close(ins);
    return rc;
}

static double now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return 1e3 * (double)ts.tv_sec + 1e-6 * (double)ts.tv_nsec;
}

static mb_reason *add_reason(mb_verdict *v, mb_reason_code c, double value,
                             double limit)
{
    if (v->n_reasons >= MB_MAX_REASONS)
        return NULL;
    mb_reason *r = &v->reasons[v->n_reasons++];
    memset(r, 0, sizeof *r);
    r->code = c;
    r->value = value;
    r->limit = limit;
    return r;
}

static void outline_name(int o, char *buf, size_t len)
{
    if (o == 0)
        snprintf(buf, len, "the outer edge");
    else
        snprintf(buf, len, "hole %d", o);
}

/*
 * Judge the measured outline as a curve, not as points. The search leaves
 * measured point i on model point i's normal; where the model's pose is
 * off along the outline (a ring's rotation is only fixed by its slight
 * ovality) the points are slid along the curve and an oval part would read
 * as deformed. So the model (pose + b, bound b_limit) is fitted to the
 * measured polyline itself: each model point's target is the nearest point
 * of the measured polyline of its outline (searched among nearby segments),
 * refitted a few times; measured points without an edge and points beyond
 * max(1 px, 3 robust sigma) are held at the model so they cannot pull it.
 * Results: ins->target (the corresponded measured points), ins->recon (the
 * model), ins->cdist (signed normal distance target - model), ins->cvalid.
 */
static void refit_curve(mb_inspector *ins, const mb_asm_result *res,
                        const mb_layout *l)
{
    const mb_shape_model *sm = ins->pm->shape;
    const double *mx = res->measured_xy;
    int n = ins->n, k = ins->k;
    mb_fit_params fp;
    mb_fit_params_default(&fp);
    fp.b_limit = ins->p.search.b_limit;
    fp.max_iter = 10;
    memcpy(ins->target, mx, (size_t)ins->d * sizeof *ins->target);
    memcpy(ins->recon, res->model_xy, (size_t)ins->d * sizeof *ins->recon);
    for (int q = 0; q < k; q++)
        ins->bfit[q] = res->b[q];
    double cut = 1e300;
    for (int it = 0; it < 4; it++) {
        /* targets: nearest point of the measured polyline to each model point */
        int first = 0;
        for (int o = 0; o < l->n_outlines; o++) {
            int c = l->counts[o];
            for (int t = 0; t < c; t++) {
                int j = first + t;
                const double *p = ins->recon + 2 * j;
                double best = 1e300, bx = p[0], by = p[1];
                int found = 0;
                for (int s = -3; s <= 2; s++) {
                    int a = first + ((t + s) % c + c) % c;
                    int b = first + ((t + s + 1) % c + c) % c;
                    if (!res->valid[a] || !res->valid[b])
                        continue;
                    double ax = mx[2 * a], ay = mx[2 * a + 1];
                    double ex = mx[2 * b] - ax, ey = mx[2 * b + 1] - ay;
                    double ee = ex * ex + ey * ey;
                    double u = ee > 0 ? ((p[0] - ax) * ex + (p[1] - ay) * ey) / ee : 0;
                    u = u < 0 ? 0 : u > 1 ? 1 : u;
                    double qx = ax + u * ex, qy = ay + u * ey;
                    double dd = (qx - p[0]) * (qx - p[0]) + (qy - p[1]) * (qy - p[1]);
                    if (dd < best) {
                        best = dd;
                        bx = qx;
                        by = qy;
                        found = 1;
                    }
                }
                ins->cvalid[j] = (uint8_t)found;
                ins->target[2 * j] = bx;
                ins->target[2 * j + 1] = by;
            }
            first += c;
        }
        /* signed distances and the robust cut */
        mb_profile_normals(l, ins->recon, ins->nrm);
        int nv = 0;
        for (int j = 0; j < n; j++) {
            ins->cdist[j] = (ins->target[2 * j] - ins->recon[2 * j]) * ins->nrm[2 * j] +
                            (ins->target[2 * j + 1] - ins->recon[2 * j + 1]) * ins->nrm[2 * j + 1];
            if (ins->cvalid[j])
                ins->work[nv++] = fabs(ins->cdist[j]);
        }
        if (it == 3 || nv < 3)
            break;
        double med = mb_stats_median_inplace(ins->work, nv);
        cut = fmax(1.0, 3.0 * 1.4826 * med);
        /* fit to the targets; outliers and invalid points held at the model */
        double *tg = ins->y; /* scratch, d values */
        for (int j = 0; j < n; j++) {
            int use = ins->cvalid[j] && fabs(ins->cdist[j]) <= cut;
            tg[2 * j] = use ? ins->target[2 * j] : ins->recon[2 * j];
            tg[2 * j + 1] = use ? ins->target[2 * j + 1] : ins->recon[2 * j + 1];
        }
        mb_fit_result fr;
        if (mb_shape_model_fit(sm, tg, NULL, &fp, ins->bfit, &fr, ins->fwork) < 0)
            break;
        mb_shape_model_reconstruct(sm, ins->bfit, ins->y);
        mb_pose_apply(&fr.pose, ins->y, n, ins->recon);
    }
}

/*
 * Between landmarks. Landmarks are 5-9 px apart, so a tear 3-5 px wide or a
 * fibre of dirt across the edge can lie between two of them unseen; the
 * search also measures the edge densely, about every px along the model
 * outline (fit/asm.h: dense_*). A dense sample between landmarks i and j
 * (fraction f) is judged like a landmark:
 *   - its distance is taken from the refit model (refit_curve), not the
 *     search's: the two differ along landmark i's normal by
 *     delta_i = (recon_i - model_i) . n_i, interpolated linearly;
 *   - its limit is the landmarks' local limits interpolated linearly, plus
 *     a corner allowance: the model outline between landmarks is a cubic
 *     through them (fit/asm.h), within 0.004 px of an arc (5 px chords on
 *     a 16 px hole), but at a sharp corner (a cut end, a lip tip) it
 *     rounds the corner in its own way, by up to about L theta / 8 for a
 *     chord of L px turning by theta radians at its ends; the allowance
 *     is CORNER_RELAX L (theta - CORNER_FREE), theta the larger turn at i
 *     and j, only where theta > CORNER_FREE, so the smooth arcs and
 *     straight sides keep their limits (16 landmarks round a bolt hole
 *     turn by 0.39 rad each);
 *   - where theta exceeds CORNER_SKIP (a corner of 30 degrees and more:
 *     the cut end of a hose, a lip seal's tip) the normals between the
 *     landmarks are ill-defined (they sweep through the corner and may run
 *     along a side), so those samples are not judged at all: the
 *     landmarks judge the corner as they did before;
 *   - its f = 0 sample is landmark i itself, judged by its curve distance
 *     cdist as before; and a run of DENSE_GAP_RUN dense samples without an
 *     edge is a gap.
 * The outline is then one sequence of samples, in order along it: the
 * dense samples when there are any, else the landmarks.
 */
#define CORNER_RELAX 0.125
#define CORNER_FREE 0.35
#define CORNER_SKIP 0.55
#define DENSE_GAP_RUN 2

/* Per landmark interval: delta and the corner allowance; per outline:
   where its dense samples start (dstart[n_outlines] = dense_n). */
static void dense_prepare(mb_inspector *ins, const mb_asm_result *res,
                          const mb_layout *l)
{
    const double *m = res->model_xy, *nm = res->normal_xy, *q = ins->recon;
    for (int j = 0; j < ins->n; j++)
        ins->delta[j] = (q[2 * j] - m[2 * j]) * nm[2 * j] +
                        (q[2 * j + 1] - m[2 * j + 1]) * nm[2 * j + 1];
    int first = 0, s = 0;
    for (int o = 0; o < l->n_outlines; o++) {
        int c = l->counts[o];
        for (int t = 0; t < c; t++) {
            /* turn at landmark t and at the next, from the refit model */
            double turn[2];
            for (int e = 0; e < 2; e++) {
                int i = first + (t + e) % c, h = first + (t + e + c - 1) % c;
                int j = first + (t + e + 1) % c;
                double ax = q[2 * i] - q[2 * h], ay = q[2 * i + 1] - q[2 * h + 1];
                double bx = q[2 * j] - q[2 * i], by = q[2 * j + 1] - q[2 * i + 1];
                turn[e] = fabs(atan2(ax * by - ay * bx, ax * bx + ay * by));
            }
            int i = first + t, j = first + (t + 1) % c;
            double len = hypot(q[2 * j] - q[2 * i], q[2 * j + 1] - q[2 * i + 1]);
            double th = fmax(turn[0], turn[1]);
            ins->relax[i] = th > CORNER_FREE ? CORNER_RELAX * len * (th - CORNER_FREE) : 0.0;
            ins->corner[i] = th > CORNER_SKIP;
        }
        ins->dstart[o] = s;
        while (s < res->dense_n && res->dense_seg[s] < first + c)
            s++;
        first += c;
    }
    ins->dstart[l->n_outlines] = s;
}

/* Sample s of outline o's sequence (landmark first + s without dense
   samples, else dense sample dstart[o] + s): signed distance to the
   refit model, its limit, whether an edge was found (edge) and whether it
   can be judged (curve: for a landmark, that its curve distance exists). */
typedef struct {
    double dist, limit;
    int edge, judged;
    int seg;     /* landmark i */
    double frac; /* of the way to the next landmark */
} local_sample;

static local_sample local_at(const mb_inspector *ins, const mb_asm_result *res,
                             const mb_layout *l, int o, int first, int s)
{
    const double *lim = ins->pm->limits.local_limit;
    local_sample r;
    int c = l->counts[o];
    if (res->dense_n == 0) {
        int i = first + s;
        r.seg = i;
        r.frac = 0.0;
        r.dist = ins->cdist[i];
        r.limit = lim[i];
        r.edge = res->valid[i];
        r.judged = ins->cvalid[i];
        return r;
    }
    int k = ins->dstart[o] + s, i = res->dense_seg[k];
    int j = first + (i - first + 1) % c;
    double f = res->dense_frac[k];
    r.seg = i;
    r.frac = f;
    if (f == 0.0) {
        r.dist = ins->cdist[i];
        r.limit = lim[i];
        r.edge = res->valid[i];
        r.judged = ins->cvalid[i];
        return r;
    }
    r.dist = res->dense_dist[k] - ((1.0 - f) * ins->delta[i] + f * ins->delta[j]);
    r.limit = (1.0 - f) * lim[i] + f * lim[j] + ins->relax[i];
    r.edge = r.judged = res->dense_valid[k];
    if (ins->corner[i]) { /* not judged, and no gap */
        r.edge = 1;
        r.judged = 0;
    }
    return r;
}

/* Where sample s of outline o lies: fraction along the outline, angle on
   the part, image point (measured when measured, else the model's). */
static void local_where(const mb_inspector *ins, const mb_asm_result *res,
                        const mb_layout *l, int o, int first, int s,
                        mb_reason *r)
{
    int c = l->counts[o];
    local_sample ls = local_at(ins, res, l, o, first, s);
    int i = ls.seg, j = first + (i - first + 1) % c;
    double f = ls.frac;
    r->position = ((double)(i - first) + f) / c;
    double a = ins->mean_angle[i] + f * remainder(ins->mean_angle[j] - ins->mean_angle[i], 360.0);
    r->angle_deg = a < 0 ? a + 360.0 : a >= 360.0 ? a - 360.0 : a;
    if (f == 0.0) {
        r->x = ls.judged ? ins->target[2 * i] : ins->recon[2 * i];
        r->y = ls.judged ? ins->target[2 * i + 1] : ins->recon[2 * i + 1];
    } else {
        int k = ins->dstart[o] + s;
        double t = res->dense_valid[k] ? res->dense_dist[k] : 0.0;
        r->x = res->dense_xy[2 * k] + t * res->dense_normal[2 * k];
        r->y = res->dense_xy[2 * k + 1] + t * res->dense_normal[2 * k + 1];
    }
}

/* Local deviations and gaps, worst first per outline and sign. */
static void judge_local(mb_inspector *ins, const mb_asm_result *res,
                        mb_verdict *v)
{
    const mb_layout *l = mb_shape_model_layout(ins->pm->shape);
    double mm = ins->p.mm_per_px > 0 ? ins->p.mm_per_px : 1.0;
    const char *unit = ins->p.mm_per_px > 0 ? "mm" : "px";
    const int dense = res->dense_n > 0;
    if (dense)
        dense_prepare(ins, res, l);
    int first = 0;
    for (int o = 0; o < l->n_outlines; o++) {
        int c = l->counts[o];
        /* samples of this outline: landmarks, or dense samples */
        int ns = dense ? ins->dstart[o + 1] - ins->dstart[o] : c;
        double len = mb_gauge_length(ins->target + 2 * first, c) * mm;
        double step = ns > 0 ? len / ns : 0.0; /* length per sample */
        char oname[32];
        outline_name(o, oname, sizeof oname);
        if (ns < 1) {
            first += c;
            continue;
        }
        /* gaps: runs of landmarks (at least gap_run) or of dense samples
           (at least DENSE_GAP_RUN) without an edge */
        int lrun = 0, run = 0, best_run = 0, best_end = 0;
        for (int t = 0; t < 2 * c; t++) { /* twice round: runs across 0 */
            lrun = res->valid[first + t % c] ? 0 : lrun + 1;
            if (lrun > best_run && lrun <= c)
                best_run = lrun;
        }
        int gap = best_run >= ins->p.gap_run;
        if (dense || gap) {
            /* located on the sample sequence */
            int dbest = 0;
            for (int t = 0; t < 2 * ns; t++) {
                run = local_at(ins, res, l, o, first, t % ns).edge ? 0 : run + 1;
                if (run > dbest && run <= ns) {
                    dbest = run;
                    best_end = t % ns;
                }
            }
            gap = gap || (dense && dbest >= DENSE_GAP_RUN);
            best_run = dbest;
        }
        if (gap) {
            int mid = ((best_end - best_run / 2) % ns + ns) % ns;
            mb_reason *r = add_reason(v, MB_REASON_GAP, best_run * step, 0);
            if (r) {
                r->outline = o;
                local_where(ins, res, l, o, first, mid, r);
                local_sample ls = local_at(ins, res, l, o, first, mid);
                if (ls.frac == 0.0) { /* the model's point: no edge there */
                    r->x = ins->recon[2 * ls.seg];
                    r->y = ins->recon[2 * ls.seg + 1];
                }
                r->position_mm = r->position * len;
                r->extent_mm = best_run * step;
                snprintf(r->text, sizeof r->text,
                         "edge missing on %s over %.2f %s at %.0f deg (%.0f %% "
                         "along): torn or missing material", oname,
                         r->extent_mm, unit, r->angle_deg, 100.0 * r->position);
            }
        }
        /* nicks (inward) and flash (outward): worst of each sign */
        for (int sign = -1; sign <= 1; sign += 2) {
            int worst = -1;
            double wr = 1.0;
            local_sample w = {0};
            for (int t = 0; t < ns; t++) {
                local_sample ls = local_at(ins, res, l, o, first, t);
                if (!ls.judged || ls.dist * sign <= 0)
                    continue;
                double ratio = fabs(ls.dist) / ls.limit;
                if (ratio > wr) {
                    wr = ratio;
                    worst = t;
                    w = ls;
                }
            }
            if (worst < 0)
                continue;
            int ext = 1;
            for (int sg = 1; sg < ns; sg++) {
                local_sample ls = local_at(ins, res, l, o, first, (worst + sg) % ns);
                if (!ls.judged || ls.dist * sign <= 0 || fabs(ls.dist) <= ls.limit)
                    break;
                ext++;
            }
            for (int sg = 1; sg < ns - ext + 1; sg++) {
                local_sample ls = local_at(ins, res, l, o, first, ((worst - sg) % ns + ns) % ns);
                if (!ls.judged || ls.dist * sign <= 0 || fabs(ls.dist) <= ls.limit)
                    break;
                ext++;
            }
            /* beyond its limit over more than a sixth of the outline: the
               outline is bent or dented, not nicked */
            int deform = ext * 6 > ns;
            mb_reason_code code = deform ? MB_REASON_DEFORM
                                  : sign < 0 ? MB_REASON_NICK : MB_REASON_FLASH;
            double depth = fabs(w.dist);
            mb_reason *r = add_reason(v, code, depth * mm, w.limit * mm);
            if (!r)
                continue;
            r->outline = o;
            local_where(ins, res, l, o, first, worst, r);
            r->position_mm = r->position * len;
            r->depth_px = depth;
            r->depth_mm = depth * mm;
            r->extent_mm = ext * step;
            if (deform)
                snprintf(r->text, sizeof r->text,
                         "%s deformed: %.2f %s %s the taught shape at %.0f deg "
                         "(%.0f %% along), beyond its limit over %.1f %s",
                         oname, depth * mm, unit, sign < 0 ? "inside" : "outside",
                         r->angle_deg, 100.0 * r->position, r->extent_mm, unit);
            else
                snprintf(r->text, sizeof r->text,
                         "%s on %s at %.0f deg (%.0f %% along): %.2f %s %s over "
                         "%.2f %s, limit %.2f %s",
                         sign < 0 ? "nick (material missing)" : "flash (material added)",
                         oname, r->angle_deg, 100.0 * r->position, depth * mm, unit,
                         sign < 0 ? "deep" : "high", r->extent_mm, unit,
                         w.limit * mm, unit);
        }
        first += c;
    }
}

/* Material beyond the edge (inspect/beyond.h): reported as flash, unless a
   local-deviation reason already names the same place. */
/* Report a finding of the checks beside the edge (inspect/beyond.h) as
   reason `code`, unless a located reason already marks that place. */
static void report_beside(mb_inspector *ins, const mb_asm_result *res,
                          const mb_beyond *b, mb_reason_code code, mb_verdict *v)
{
    double x = res->dense_xy[2 * b->worst], y = res->dense_xy[2 * b->worst + 1];
    for (int i = 0; i < v->n_reasons; i++) {
        const mb_reason *r = &v->reasons[i];
        if (mb_reason_located(r->code) && hypot(r->x - x, r->y - y) < 10.0)
            return;
    }
    const mb_layout *l = mb_shape_model_layout(ins->pm->shape);
    int lm = res->dense_seg[b->worst], o = 0, first = 0;
    while (o < l->n_outlines - 1 && lm >= first + l->counts[o])
        first += l->counts[o++];
    double mm = ins->p.mm_per_px > 0 ? ins->p.mm_per_px : 1.0;
    const char *unit = ins->p.mm_per_px > 0 ? "mm" : "px";
    double ext = b->len * res->dense_spacing * mm;
    mb_reason *r = add_reason(v, code, ext, 0);
    if (!r)
        return;
    char oname[32];
    outline_name(o, oname, sizeof oname);
    r->outline = o;
    r->position = (lm - first + res->dense_frac[b->worst]) / l->counts[o];
    r->angle_deg = ins->mean_angle[lm];
    r->x = x;
    r->y = y;
    r->extent_mm = ext;
    r->depth_mm = 3.0 * mm;
    r->depth_px = 3.0;
    if (code == MB_REASON_SPOT)
        snprintf(r->text, sizeof r->text,
                 "a spot on the part beside %s at %.0f deg (%.0f %% along) "
                 "over %.2f %s: dirt or a fibre on the part, or a hole "
                 "through it", oname, r->angle_deg, 100.0 * r->position, ext, unit);
    else
        snprintf(r->text, sizeof r->text,
                 "material beyond %s at %.0f deg (%.0f %% along) over %.2f %s: "
                 "contamination or flash touching the part", oname, r->angle_deg,
                 100.0 * r->position, ext, unit);
}

/* Material beyond the edge, and spots on the part beside it. */
static void judge_beside(mb_inspector *ins, const mb_image *frame,
                         const mb_asm_result *res, mb_verdict *v)
{
    const mb_profile_stats *st = mb_profile_model_stats(ins->pm->profiles);
    const mb_layout *l = mb_shape_model_layout(ins->pm->shape);
    mb_beyond b;
    mb_beyond_check(frame, res, l, ins->corner, st->part_grey, st->back_grey, 2, &b);
    if (b.found)
        report_beside(ins, res, &b, MB_REASON_FLASH, v);
    mb_spot_check(frame, res, l, ins->corner, st->part_grey, st->back_grey, 2, &b);
    if (b.found)
        report_beside(ins, res, &b, MB_REASON_SPOT, v);
}

static void fault(mb_verdict *v, mb_reason_code c, const char *text)
{
    v->verdict = MB_VERDICT_FAULT;
    mb_reason *r = add_reason(v, c, 0, 0);
    if (r)
        snprintf(r->text, sizeof r->text, "%s", text);
}

static void reject_presence(mb_verdict *v, mb_reason_code c, const char *text)
{
    v->verdict = MB_VERDICT_REJECT;
    mb_reason *r = add_reason(v, c, 0, 0);
    if (r)
        snprintf(r->text, sizeof r->text, "%s", text);
}

/* The first half of an inspection: the frame's size, the pyramid, where
   the part is. Returns 1 when a part was located (ins->lr), 0 when v is
   final (no part, off the edge, two parts, a fault). */
static int look(mb_inspector *ins, const mb_image *frame, mb_verdict *v)
{
    memset(v, 0, sizeof *v);
    v->layout = mb_shape_model_layout(ins->pm->shape);
    char text[200];

    if (!frame->pixels || frame->width != ins->w || frame->height != ins->h) {
        snprintf(text, sizeof text,
                 "frame is %dx%d px but the model was taught on %dx%d px frames",
                 frame->width, frame->height, ins->w, ins->h);
        fault(v, MB_REASON_FRAME, text);
        return 0;
    }
    ins->frame = *frame;
    memset(&ins->lr, 0, sizeof ins->lr);
    if (mb_pyramid_build(ins->pyr, frame) < 0) {
        fault(v, MB_REASON_INTERNAL, "the image pyramid could not be built");
        return 0;
    }
    mb_locate_result *lr = &ins->lr;
    int rc = mb_locate_run(ins->loc, ins->pyr, lr);
    if (rc == MB_ENOPART) {
        reject_presence(v, MB_REASON_NO_PART, "no part in view");
        return 0;
    }
    if (rc == MB_EEDGE) {
        reject_presence(v, MB_REASON_OFF_EDGE,
                        "the part is cut by the frame edge (not fully in view)");
        return 0;
    }
    if (rc == MB_EMULTIPLE) {
        snprintf(text, sizeof text, "%d parts in view; one part per frame expected",
                 lr->n_parts);
        reject_presence(v, MB_REASON_TWO_PARTS, text);
        return 0;
    }
    if (rc < 0) {
        snprintf(text, sizeof text, "locating the part failed: %s", mb_strerror(rc));
        fault(v, MB_REASON_INTERNAL, text);
        return 0;
    }
    return 1;
}

/* The second half: fit the model where look() found the part, and judge. */
static void judge(mb_inspector *ins, mb_verdict *v)
{
    const mb_part_model *pm = ins->pm;
    const mb_limits *lim = &pm->limits;
    double mm = ins->p.mm_per_px;
    const char *unit = mm > 0 ? "mm" : "px";
    double u = mm > 0 ? mm : 1.0;
    char text[200];
    int rc;
    mb_asm_result res;
    rc = mb_asm_search(ins->search, ins->pyr, ins->lr.candidates, ins->lr.n_candidates,
                       &res);
    if (rc < 0) {
        snprintf(text, sizeof text, "the model search failed: %s", mb_strerror(rc));
        fault(v, MB_REASON_INTERNAL, text);
        return;
    }
    v->converged = res.converged;
    v->pose = res.pose;
    v->angle_deg = res.pose.angle * 180.0 / M_PI;
    v->scale = res.pose.scale;
    v->measured = res.measured_xy;
    v->model_xy = res.model_xy;
    v->dist = res.dist;
    v->valid = res.valid;
    /* A fit that did not converge is judged all the same, so a badly
       deformed part gets the reasons that show it; it can never pass: with
       no failed check it is a fault (below). */

    refit_curve(ins, &res, v->layout);
    v->model_xy = ins->recon;
    v->corresponded = ins->target;
    v->dist = ins->cdist;

    /* scores of the measured outline, as in the teaching (bands.c) */
    const mb_shape_model *sm = pm->shape;
    const double *mean = mb_shape_model_mean(sm);
    const double *modes = mb_shape_model_modes(sm);
    const double *eig = mb_shape_model_eig(sm);
    int n = ins->n, d = ins->d, k = ins->k;
    mb_pose al;
    if (mb_procrustes_fit(ins->target, mean, n, NULL, &al, NULL) < 0) {
        fault(v, MB_REASON_INTERNAL, "the measured outline is degenerate");
        return;
    }
    mb_pose_apply(&al, ins->target, n, ins->y);
    double ym = 0, mm2 = 0;
    for (int c = 0; c < d; c++) {
        ym += ins->y[c] * mean[c];
        mm2 += mean[c] * mean[c];
    }
    double ts = ym > 0 ? mm2 / ym : 1.0;
    for (int c = 0; c < d; c++)
        ins->y[c] = ins->y[c] * ts - mean[c];
    double t2 = 0;
    for (int q = 0; q < k; q++) {
        const double *uq = modes + (size_t)q * d;
        double b = 0;
        for (int c = 0; c < d; c++)
            b += uq[c] * ins->y[c];
        for (int c = 0; c < d; c++)
            ins->y[c] -= b * uq[c];
        ins->b[q] = b;
        ins->z[q] = b / sqrt(eig[q]);
        t2 += ins->z[q] * ins->z[q];
    }
    double spe = 0;
    for (int c = 0; c < d; c++)
        spe += ins->y[c] * ins->y[c];
    v->n_modes = k;
    v->b_sd = ins->z;
    v->t2 = t2;
    v->spe = spe;
    double cx = 0, cy = 0, r2 = 0;
    for (int j = 0; j < n; j++) {
        cx += res.measured_xy[2 * j];
        cy += res.measured_xy[2 * j + 1];
    }
    cx /= n;
    cy /= n;
    for (int j = 0; j < n; j++)
        r2 += (res.measured_xy[2 * j] - cx) * (res.measured_xy[2 * j] - cx) +
              (res.measured_xy[2 * j + 1] - cy) * (res.measured_xy[2 * j + 1] - cy);
    v->size_px = sqrt(r2 / n);
    v->size_mm = mm > 0 ? v->size_px * mm : 0.0;
    if (ins->p.calib) {
        mb_calib_scale sc;
        v->size_mm = mb_calib_local_scale(ins->p.calib, cx, cy, &sc) == 0
                         ? v->size_px * sc.mm_per_px : NAN;
    }

    /* checks, most specific first */
    if (v->size_px < lim->size_lo || v->size_px > lim->size_hi) {
        int big = v->size_px > lim->size_hi;
        double edge = big ? lim->size_hi : lim->size_lo;
        mb_reason *r = add_reason(v, MB_REASON_SIZE, v->size_px * u, edge * u);
        if (r)
            snprintf(r->text, sizeof r->text,
                     "size (RMS radius) %.3f %s, band %.3f .. %.3f %s: too %s by "
                     "%.3f %s", v->size_px * u, unit, lim->size_lo * u,
                     lim->size_hi * u, unit, big ? "large" : "small",
                     fabs(v->size_px - edge) * u, unit);
    }
    judge_local(ins, &res, v);
    judge_beside(ins, &ins->frame, &res, v);
    if (pm->n_gauges > 0 && (mm > 0 || ins->p.calib)) {
        /* On the conveyor plane: through the calibration when there is
           one (perspective and lens distortion removed), else one scale. */
        int pts_ok = 1;
        if (ins->p.calib)
            pts_ok = mb_calib_points_to_mm(ins->p.calib, n, res.measured_xy,
                                           ins->mm_pts) == 0;
        else
            for (int c = 0; c < d; c++)
                ins->mm_pts[c] = res.measured_xy[c] * mm;
        for (int g = 0; g < pm->n_gauges; g++) {
            const mb_gauge_def *gd = &pm->gauges[g];
            mb_gauge_value *gv = &v->gauges[v->n_gauges++];
            snprintf(gv->name, sizeof gv->name, "%s", gd->name);
            gv->nominal = gd->nominal;
            if (!pts_ok ||
                mb_gauge_measure(gd, v->layout, ins->mm_pts, ins->work, &gv->value) < 0) {
                gv->value = NAN;
                gv->ok = 0;
            } else {
                gv->deviation = gv->value - gd->nominal;
                gv->ok = gv->deviation >= gd->tol_lo && gv->deviation <= gd->tol_hi;
            }
            if (!gv->ok) {
                mb_reason *r = add_reason(v, MB_REASON_GAUGE, gv->value, gd->nominal);
                if (r) {
                    r->mode = g;
                    snprintf(r->text, sizeof r->text,
                             "gauge %s (%s) %.3f mm, drawing %.3f %+.3f/%+.3f mm",
                             gd->name, mb_gauge_kind_name(gd->kind), gv->value,
                             gd->nominal, gd->tol_hi, gd->tol_lo);
                }
            }
        }
    }
    for (int q = 0; q < lim->n_judged && q < k; q++) {
        if (fabs(ins->z[q]) > lim->mode_band[q]) {
            mb_reason *r = add_reason(v, MB_REASON_MODE, ins->z[q], lim->mode_band[q]);
            if (r) {
                r->mode = q + 1;
                snprintf(r->text, sizeof r->text,
                         "mode %d of the shape at %+.1f sd, band +-%.1f sd", q + 1,
                         ins->z[q], lim->mode_band[q]);
            }
        }
    }
    if (t2 > lim->t2_limit) {
        mb_reason *r = add_reason(v, MB_REASON_SHAPE, t2, lim->t2_limit);
        if (r)
            snprintf(r->text, sizeof r->text,
                     "overall shape distance T^2 %.1f over its limit %.1f", t2,
                     lim->t2_limit);
    }
    if (spe > lim->spe_limit) {
        mb_reason *r = add_reason(v, MB_REASON_RESIDUAL, spe, lim->spe_limit);
        if (r)
            snprintf(r->text, sizeof r->text,
                     "shape outside the taught variation: residual %.1f times "
                     "its limit", spe / lim->spe_limit);
    }
    if (!res.converged) {
        int judged = v->n_reasons;
        mb_reason *r = add_reason(v, MB_REASON_NO_FIT, 0, 0);
        if (r)
            snprintf(r->text, sizeof r->text,
                     "the model search did not converge (%d of %d landmarks "
                     "found an edge)%s", res.n_valid, n,
                     judged ? "" : "; treated as a fault, never a pass");
        v->verdict = judged ? MB_VERDICT_REJECT : MB_VERDICT_FAULT;
        return;
    }
    v->verdict = v->n_reasons ? MB_VERDICT_REJECT : MB_VERDICT_PASS;
}

static void seal(const mb_verdict *v)
{
    MB_ASSERT(v->verdict != MB_VERDICT_PASS || (v->converged && v->n_reasons == 0));
    MB_ASSERT(v->verdict == MB_VERDICT_PASS || v->n_reasons > 0);
}

int mb_inspector_run(mb_inspector *ins, const mb_image *frame, mb_verdict *v)
{
    if (!ins || !frame || !v)
        return MB_EINVAL;
    double t0 = now_ms();
    ins->looked = 0;
    if (look(ins, frame, v))
        judge(ins, v);
    seal(v);
    v->ms = now_ms() - t0;
    return MB_OK;
}

int mb_inspector_look(mb_inspector *ins, const mb_image *frame, mb_verdict *v)
{
    if (!ins || !frame || !v)
        return MB_EINVAL;
    double t0 = now_ms();
    ins->looked = look(ins, frame, v);
    if (!ins->looked)
        seal(v);
    v->ms = now_ms() - t0;
    return ins->looked;
}

const mb_locate_result *mb_inspector_located(const mb_inspector *ins)
{
    return ins ? &ins->lr : NULL;
}

int mb_inspector_finish(mb_inspector *ins, mb_verdict *v)
{
    if (!ins || !v || !ins->looked)
        return MB_EINVAL;
    double t0 = now_ms() - v->ms;
    ins->looked = 0;
    judge(ins, v);
    seal(v);
    v->ms = now_ms() - t0;
    return MB_OK;
}
