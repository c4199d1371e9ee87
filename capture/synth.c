/*
 * capture/synth.c - the synthetic production line: configuration, the
 * station (illumination, belt texture, noise table), placement of each part
 * in the frame and image formation.
 *
 * Image formation, per pixel p:
 *     I(p) = B(p) + (P(p) - B(p)) * a(p)       part over background
 *     I(p) = I(p) + (C(p) - I(p)) * c(p)       contamination over that
 *     out  = round(I(p) + noise)                clamped to 0..255
 * where a and c are the exact area coverage of the part and of the
 * contamination (capture/render.h) convolved with the Gaussian optical
 * blur, B the background (bright field, or belt plus texture) and P, C the
 * part and contamination grey levels, all times the illumination. Blurring
 * the coverage instead of the finished image is exact where B and P are
 * constant and differs by far less than a grey level where they vary slowly
 * (illumination) or weakly (belt texture), and it keeps the blur to the
 * part's neighbourhood.
 *
 * Sensor noise: zero-mean Gaussian, drawn from a table of 65536 quantiles
 * of the normal distribution (inverse CDF at (k + 0.5) / 65536), indexed by
 * 16 random bits: exact to the table's resolution, truncated at 4.3 sigma,
 * and several times faster than Box-Muller per pixel.
 */
#include "synth.h"

#include "error.h"
#include "render.h"
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define TEX_SIZE 256 /* belt texture tile, px (power of two: wraps by mask) */
#define NOISE_TABLE 65536

/* Grey levels at the frame centre. */
#define BACK_FIELD 215.0
#define BACK_PART 22.0
#define FRONT_BELT 72.0
#define FRONT_PART 150.0
#define FRONT_CONTAM 40.0

struct mb_synth {
    mb_synth_config cfg;
    const mb_synth_family_def *fam;
    uint64_t next_index;
    double step; /* outline point spacing, mm (about one pixel) */
    int margin;  /* px kept free around a part in view */
    double grey_part, grey_bg, grey_contam;
    float *bg;    /* width x height: background level, no texture */
    float *illum; /* width x height: illumination factor */
    float *tex;   /* TEX_SIZE^2 belt texture, grey levels (front-lit) */
    float *noise; /* NOISE_TABLE noise values, grey levels */
    mb_synth_polys part, contam;
    mb_synth_scratch sc;
    double *truth_xy, *contam_xy; /* px */
    float *cov, *cov2, *work;
};

/* ---- names */

static const char *const family_names[MB_SYNTH_N_FAMILIES] = {
    "ring", "flange", "hose", "lipseal"};
static const char *const defect_names[MB_SYNTH_N_DEFECTS] = {
    "none", "nick",    "flash",         "tear",  "missing", "deform",
    "size", "variant", "contamination", "empty", "cut"};
static const char *const lighting_names[2] = {"back", "front"};

const char *mb_synth_family_name(int family)
{
    return family >= 0 && family < MB_SYNTH_N_FAMILIES ? family_names[family]
                                                       : "?";
}

const char *mb_synth_part_number(int family)
{
    const mb_synth_family_def *f = mb_synth_family_get(family);
    return f ? f->part_number : "?";
}

const char *mb_synth_defect_name(int type)
{
    return type >= 0 && type < MB_SYNTH_N_DEFECTS ? defect_names[type] : "?";
}

const char *mb_synth_lighting_name(int lighting)
{
    return lighting == 0 || lighting == 1 ? lighting_names[lighting] : "?";
}

static int lookup(const char *name, const char *const *names, int n)
{
    if (!name)
        return MB_EINVAL;
    for (int i = 0; i < n; i++)
        if (!strcmp(name, names[i]))
            return i;
    return MB_EINVAL;
}

int mb_synth_family_from_name(const char *name)
{
    return lookup(name, family_names, MB_SYNTH_N_FAMILIES);
}

int mb_synth_defect_from_name(const char *name)
{
    return lookup(name, defect_names, MB_SYNTH_N_DEFECTS);
}

int mb_synth_lighting_from_name(const char *name)
{
    return lookup(name, lighting_names, 2);
}

/* ---- configuration */

void mb_synth_config_default(mb_synth_config *cfg, mb_synth_family family)
{
    memset(cfg, 0, sizeof *cfg);
    cfg->family = family;
    cfg->width = 1280;
    cfg->height = 1024;
    cfg->mm_per_px = 0.1;
    cfg->lighting = MB_SYNTH_BACKLIT;
    cfg->noise_sigma = 2.0;
    cfg->blur_sigma = 1.0;
    cfg->illumination = 0.12;
    cfg->variation = 1.0;
    cfg->drift_per_part = 0.0;
    cfg->defect_rate = 0.0;
    cfg->defect_mask = MB_SYNTH_MASK_DEFAULT;
    cfg->seed = 1;
}

static int check_config(const mb_synth_config *c, char *err)
{
    if (!mb_synth_family_get((int)c->family))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: family %d is not one of 0..%d",
                          (int)c->family, MB_SYNTH_N_FAMILIES - 1);
    if (c->width < 16 || c->height < 16 || c->width > 16384 ||
        c->height > 16384)
        return mb_err_set(
            err, MB_EINVAL,
            "synthetic line: frame size %dx%d is outside 16..16384 px",
            c->width, c->height);
    if (!(c->mm_per_px >= 0.005 && c->mm_per_px <= 10))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: mm_per_px %g is outside 0.005..10",
                          c->mm_per_px);
    if (c->lighting != MB_SYNTH_BACKLIT && c->lighting != MB_SYNTH_FRONTLIT)
        return mb_err_set(
            err, MB_EINVAL,
            "synthetic line: lighting %d is not back (0) or front (1)",
            (int)c->lighting);
    if (!(c->noise_sigma >= 0 && c->noise_sigma <= 50))
        return mb_err_set(
            err, MB_EINVAL,
            "synthetic line: noise sigma %g is outside 0..50 grey levels",
            c->noise_sigma);
    if (!(c->blur_sigma >= 0 && c->blur_sigma <= 10))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: blur sigma %g is outside 0..10 px",
                          c->blur_sigma);
    if (!(c->illumination >= 0 && c->illumination <= 0.5))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: illumination %g is outside 0..0.5",
                          c->illumination);
    if (!(c->variation >= 0 && c->variation <= 5))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: variation %g is outside 0..5",
                          c->variation);
    if (!(fabs(c->drift_per_part) <= 1e-3))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: drift per part %g is outside "
                          "-0.001..0.001",
                          c->drift_per_part);
    if (!(c->defect_rate >= 0 && c->defect_rate <= 1))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: defect rate %g is outside 0..1",
                          c->defect_rate);
    unsigned all = ((1u << MB_SYNTH_N_DEFECTS) - 1u) & ~(1u << MB_SYNTH_NONE);
    if (c->defect_mask & ~all)
        return mb_err_set(
            err, MB_EINVAL,
            "synthetic line: defect mask 0x%x has bits outside 0x%x",
            c->defect_mask, all);
    if (c->defect_rate > 0 && !c->defect_mask)
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: a defect rate above 0 needs at "
                          "least one defect type");
    if (c->defect_max_mm > 0 &&
        !(c->defect_min_mm > 0 && c->defect_min_mm <= c->defect_max_mm &&
          c->defect_max_mm <= 10))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: defect sizes %g..%g mm are not 0 < "
                          "min <= max <= 10",
                          c->defect_min_mm, c->defect_max_mm);
    return 0;
}

/* ---- the station: noise table, illumination, belt texture */

/* Inverse of the standard normal CDF: the rational approximation of
   Abramowitz and Stegun 26.2.23 (error < 4.5e-4, coefficients quoted from
   the Handbook) as a start, then Newton steps on Phi(x) = 0.5 erfc(-x/sqrt2)
   to full precision. */
static double inverse_normal(double p)
{
    double q = p < 0.5 ? p : 1 - p, t = sqrt(-2.0 * log(q));
    double x =
        t - (2.515517 + 0.802853 * t + 0.010328 * t * t) /
                (1 + 1.432788 * t + 0.189269 * t * t + 0.001308 * t * t * t);
    if (p < 0.5)
        x = -x;
    for (int i = 0; i < 4; i++) {
        double e = 0.5 * erfc(-x / M_SQRT2) - p;
        x -= e / (exp(-0.5 * x * x) / sqrt(2 * M_PI));
    }
    return x;
}

static void make_noise_table(float *table, double sigma)
{
    for (int k = 0; k < NOISE_TABLE / 2; k++) {
        double v = sigma * inverse_normal((k + 0.5) / NOISE_TABLE);
        table[k] = (float)v;
        table[NOISE_TABLE - 1 - k] = (float)-v;
    }
}

/* Belt texture: white noise smoothed over a few px (the weave's blotches)
   plus a fine regular weave, on a wrapping tile. */
static void make_texture(float *tex, float *tmp, mb_synth_rng *r)
{
    for (int i = 0; i < TEX_SIZE * TEX_SIZE; i++)
        tmp[i] = (float)mb_synth_rng_normal(r);
    /* circular box blur 5x5, twice (close to a Gaussian of sigma ~2 px) */
    for (int pass = 0; pass < 2; pass++) {
        for (int y = 0; y < TEX_SIZE; y++)
            for (int x = 0; x < TEX_SIZE; x++) {
                float s = 0;
                for (int k = -2; k <= 2; k++)
                    s += tmp[y * TEX_SIZE + ((x + k) & (TEX_SIZE - 1))];
                tex[y * TEX_SIZE + x] = s / 5;
            }
        for (int y = 0; y < TEX_SIZE; y++)
            for (int x = 0; x < TEX_SIZE; x++) {
                float s = 0;
                for (int k = -2; k <= 2; k++)
                    s += tex[((y + k) & (TEX_SIZE - 1)) * TEX_SIZE + x];
                tmp[y * TEX_SIZE + x] = s / 5;
            }
    }
    double ss = 0;
    for (int i = 0; i < TEX_SIZE * TEX_SIZE; i++)
        ss += (double)tmp[i] * tmp[i];
    float norm = (float)(4.0 / sqrt(ss / (TEX_SIZE * TEX_SIZE))); /* sd 4 */
    for (int y = 0; y < TEX_SIZE; y++)
        for (int x = 0; x < TEX_SIZE; x++) {
            double weave =
                1.5 * sin(2 * M_PI * x / 8.0) * sin(2 * M_PI * y / 8.0);
            tex[y * TEX_SIZE + x] = norm * tmp[y * TEX_SIZE + x] + (float)weave;
        }
}

static void make_station(mb_synth *g)
{
    const mb_synth_config *c = &g->cfg;
    mb_synth_rng r;
    mb_synth_rng_seed(&r, c->seed, MB_SYNTH_STREAM_STATION, 0, 0);
    double phi = mb_synth_rng_range(&r, 0, 2 * M_PI);
    double gx = cos(phi), gy = sin(phi);
    double cx = 0.5 * (c->width - 1), cy = 0.5 * (c->height - 1);
    double half_diag = hypot(cx, cy);
    double level = c->lighting == MB_SYNTH_BACKLIT ? BACK_FIELD : FRONT_BELT;
    for (int y = 0; y < c->height; y++)
        for (int x = 0; x < c->width; x++) {
            double dx = (x - cx) / half_diag, dy = (y - cy) / half_diag;
            double il = 1.0 - c->illumination * (dx * dx + dy * dy) +
                        0.3 * c->illumination * (gx * dx + gy * dy);
            size_t i = (size_t)y * (size_t)c->width + (size_t)x;
            g->illum[i] = (float)il;
            g->bg[i] = (float)(level * il);
        }
    if (c->lighting == MB_SYNTH_FRONTLIT)
        make_texture(g->tex, g->work, &r);
    make_noise_table(g->noise, c->noise_sigma);
}

/* ---- open / close */

static int polys_alloc(mb_synth_polys *p, int cap)
{
    p->xy = malloc(sizeof(double) * 2 * (size_t)cap);
    p->cap = cap;
    mb_synth_polys_clear(p);
    return p->xy ? 0 : MB_ENOMEM;
}

void mb_synth_close(mb_synth *g)
{
    if (!g)
        return;
    free(g->bg);
    free(g->illum);
    free(g->tex);
    free(g->noise);
    free(g->part.xy);
    free(g->contam.xy);
    free(g->sc.ref.xy);
    free(g->sc.tmp.xy);
    free(g->sc.arc);
    free(g->sc.sorted);
    free(g->truth_xy);
    free(g->contam_xy);
    free(g->cov);
    free(g->cov2);
    free(g->work);
    free(g);
}

int mb_synth_open(const mb_synth_config *cfg, mb_synth **out, char *err)
{
    if (!cfg || !out)
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: no configuration given");
    *out = NULL;
    int rc = check_config(cfg, err);
    if (rc < 0)
        return rc;
    mb_synth *g = calloc(1, sizeof *g);
    if (!g)
        return mb_err_set(err, MB_ENOMEM, "synthetic line: out of memory");
    g->cfg = *cfg;
    g->fam = mb_synth_family_get((int)cfg->family);
    g->step = cfg->mm_per_px; /* outline points about 1 px apart */
    g->margin = (int)ceil(3 * cfg->blur_sigma) + 2;
    if (cfg->lighting == MB_SYNTH_BACKLIT) {
        g->grey_part = BACK_PART;
        g->grey_bg = BACK_FIELD;
        g->grey_contam = BACK_PART; /* opaque, like the part */
    } else {
        g->grey_part = FRONT_PART;
        g->grey_bg = FRONT_BELT;
        g->grey_contam = FRONT_CONTAM;
    }

    /* Size the outline buffers from the nominal part: twice its points
       leaves room for size changes, deformation and defects. */
    mb_synth_polys probe;
    int probe_cap = 4 * MB_MAX_OUTLINE_POINTS;
    rc = MB_ENOMEM;
    if (polys_alloc(&probe, probe_cap) < 0)
        goto fail;
    mb_synth_shape nominal;
    mb_synth_rng r;
    mb_synth_rng_seed(&r, 0, 0, 0, 0);
    mb_synth_shape_draw(g->fam, 0.0, &r, &nominal);
    mb_synth_shape_build(g->fam, &nominal, g->step, &probe);
    int too_many = probe.overflow;
    double minx = INFINITY, maxx = -INFINITY, miny = INFINITY, maxy = -INFINITY;
    for (int o = 0; o < probe.n_outlines && !too_many; o++)
        if (2 * mb_synth_polys_count(&probe, o) > MB_MAX_OUTLINE_POINTS)
            too_many = 1;
    for (int i = 0; i < probe.n; i++) {
        minx = fmin(minx, probe.xy[2 * i]);
        maxx = fmax(maxx, probe.xy[2 * i]);
        miny = fmin(miny, probe.xy[2 * i + 1]);
        maxy = fmax(maxy, probe.xy[2 * i + 1]);
    }
    /* radius of the circle about the box centre holding the nominal part */
    double rad = 0;
    for (int i = 0; i < probe.n; i++)
        rad = fmax(rad, hypot(probe.xy[2 * i] - 0.5 * (minx + maxx),
                              probe.xy[2 * i + 1] - 0.5 * (miny + maxy)));
    int nominal_points = probe.n;
    free(probe.xy);
    if (too_many) {
        rc = mb_err_set(
            err, MB_ERANGE,
            "synthetic line: at %g mm per px a %s outline would need more "
            "than %d points; use a coarser scale",
            cfg->mm_per_px, g->fam->name, MB_MAX_OUTLINE_POINTS / 2);
        goto fail;
    }
    /* Any rotation must fit: the nominal part's enclosing circle, 10 %
       larger for variation and defects, plus the margins. */
    double diam_px = 2.2 * rad / cfg->mm_per_px;
    if (diam_px + 2 * g->margin >
        (cfg->width < cfg->height ? cfg->width : cfg->height)) {
        rc = mb_err_set(
            err, MB_ERANGE,
            "synthetic line: a %s part (%.1f x %.1f mm) needs a frame of at "
            "least %.0f px in both directions at %g mm per px; the frame "
            "is %dx%d",
            g->fam->name, maxx - minx, maxy - miny,
            ceil(diam_px + 2 * g->margin), cfg->mm_per_px, cfg->width,
            cfg->height);
        goto fail;
    }
    int cap = 2 * nominal_points + 4096;
    int ccap = 4 * (int)ceil(10.0 / g->step) + 512;
    size_t npx = (size_t)cfg->width * (size_t)cfg->height;
    size_t ncov = (size_t)(cfg->width + 2) * (size_t)cfg->height;
    int wsize = mb_blur_work_size(cfg->width, cfg->height);
    if ((size_t)wsize < (size_t)TEX_SIZE * TEX_SIZE)
        wsize = TEX_SIZE * TEX_SIZE;
    if (polys_alloc(&g->part, cap) < 0 || polys_alloc(&g->contam, ccap) < 0 ||
        polys_alloc(&g->sc.ref, cap) < 0 || polys_alloc(&g->sc.tmp, cap) < 0)
        goto fail;
    g->sc.cap = cap > 2 * ccap ? cap : 2 * ccap;
    g->sc.arc = malloc(sizeof(double) * (size_t)(g->sc.cap + 1));
    g->sc.sorted = malloc(sizeof(double) * 3 * (size_t)g->sc.cap);
    g->truth_xy = malloc(sizeof(double) * 2 * (size_t)cap);
    g->contam_xy = malloc(sizeof(double) * 2 * (size_t)ccap);
    g->bg = malloc(sizeof(float) * npx);
    g->illum = malloc(sizeof(float) * npx);
    g->tex = malloc(sizeof(float) * TEX_SIZE * TEX_SIZE);
    g->noise = malloc(sizeof(float) * NOISE_TABLE);
    g->cov = malloc(sizeof(float) * ncov);
    g->cov2 = malloc(sizeof(float) * ncov);
    g->work = malloc(sizeof(float) * (size_t)wsize);
    if (!g->sc.arc || !g->sc.sorted || !g->truth_xy || !g->contam_xy ||
        !g->bg || !g->illum || !g->tex || !g->noise || !g->cov || !g->cov2 ||
        !g->work)
        goto fail;
    make_station(g);
    *out = g;
    return 0;
fail:
    if (rc == MB_ENOMEM)
        mb_err_set(err, MB_ENOMEM, "synthetic line: out of memory");
    mb_synth_close(g);
    return rc;
}

const mb_synth_config *mb_synth_get_config(const mb_synth *g)
{
    return g ? &g->cfg : NULL;
}

/* ---- one frame */

static int draw_defect_type(const mb_synth *g, uint64_t index)
{
    mb_synth_rng r;
    mb_synth_rng_seed(&r, g->cfg.seed, MB_SYNTH_STREAM_KIND, index, 0);
    double u = mb_synth_rng_uniform(&r), v = mb_synth_rng_uniform(&r);
    if (u >= g->cfg.defect_rate || !g->cfg.defect_mask)
        return MB_SYNTH_NONE;
    int n = 0;
    for (int t = 1; t < MB_SYNTH_N_DEFECTS; t++)
        n += (g->cfg.defect_mask >> t) & 1u;
    int k = (int)(v * n);
    for (int t = 1; t < MB_SYNTH_N_DEFECTS; t++)
        if ((g->cfg.defect_mask >> t) & 1u) {
            if (k == 0)
                return t;
            k--;
        }
    return MB_SYNTH_NONE;
}

/* Bounding box of a rotated point set, px, relative to the part origin. */
static void rotated_box(const mb_synth_polys *p, double c, double s,
                        double scale, double box[4])
{
    for (int i = 0; i < p->n; i++) {
        double x = p->xy[2 * i], y = p->xy[2 * i + 1];
        double u = scale * (c * x - s * y), v = scale * (s * x + c * y);
        box[0] = fmin(box[0], u);
        box[1] = fmax(box[1], u);
        box[2] = fmin(box[2], v);
        box[3] = fmax(box[3], v);
    }
}

/* Choose the pose: any angle, the origin anywhere the whole geometry stays
   margin px inside the frame; for CUT, partly outside one side. */
static int place(mb_synth *g, uint64_t index, int shot, int cut, mb_pose *pose,
                 mb_synth_defect *d)
{
    const mb_synth_config *c = &g->cfg;
    mb_synth_rng r;
    mb_synth_rng_seed(&r, c->seed, MB_SYNTH_STREAM_PLACE, index, shot);
    double scale = 1.0 / c->mm_per_px, m = g->margin;
    for (int attempt = 0; attempt < 16; attempt++) {
        double a = mb_synth_rng_range(&r, 0, 2 * M_PI);
        double u = mb_synth_rng_uniform(&r), v = mb_synth_rng_uniform(&r);
        double box[4] = {INFINITY, -INFINITY, INFINITY, -INFINITY};
        rotated_box(&g->part, cos(a), sin(a), scale, box);
        rotated_box(&g->contam, cos(a), sin(a), scale, box);
        double xlo = m - box[0], xhi = c->width - 1 - m - box[1];
        double ylo = m - box[2], yhi = c->height - 1 - m - box[3];
        pose->angle = a;
        pose->scale = scale;
        if (cut) {
            int side = (int)(mb_synth_rng_uniform(&r) * 4);
            double q = mb_synth_rng_range(&r, 0.15, 0.45);
            double ex = box[1] - box[0], ey = box[3] - box[2];
            double tx = xlo > xhi ? 0.5 * c->width : xlo + u * (xhi - xlo);
            double ty = ylo > yhi ? 0.5 * c->height : ylo + v * (yhi - ylo);
            double out_px;
            switch (side) {
            case 0:
                tx = -box[0] - q * ex;
                out_px = q * ex;
                break;
            case 1:
                tx = c->width - 1 - box[1] + q * ex;
                out_px = q * ex;
                break;
            case 2:
                ty = -box[2] - q * ey;
                out_px = q * ey;
                break;
            default:
                ty = c->height - 1 - box[3] + q * ey;
                out_px = q * ey;
                break;
            }
            pose->tx = tx;
            pose->ty = ty;
            d->size_mm = out_px * c->mm_per_px;
            d->x = side == 0 ? 0 : (side == 1 ? c->width - 1 : tx);
            d->y = side == 2 ? 0 : (side == 3 ? c->height - 1 : ty);
            return 0;
        }
        if (xlo > xhi || ylo > yhi)
            continue;
        pose->tx = xlo + u * (xhi - xlo);
        pose->ty = ylo + v * (yhi - ylo);
        return 0;
    }
    return MB_ERANGE;
}

static void to_pixels(const mb_pose *pose, const mb_synth_polys *p, double *out)
{
    double c = cos(pose->angle) * pose->scale,
           s = sin(pose->angle) * pose->scale;
    for (int i = 0; i < p->n; i++) {
        double x = p->xy[2 * i], y = p->xy[2 * i + 1];
        out[2 * i] = c * x - s * y + pose->tx;
        out[2 * i + 1] = s * x + c * y + pose->ty;
    }
}

/* Coverage of the outlines of p (px in xy) into a plane over `win`. */
static void render_layer(mb_synth *g, const mb_synth_polys *p, const double *xy,
                         const int win[4], float *cells, mb_coverage *cov)
{
    mb_coverage_reset(cov, cells, win[0], win[1], win[2] - win[0],
                      win[3] - win[1]);
    for (int o = 0; o < p->n_outlines; o++)
        mb_coverage_add(cov, xy + 2 * p->first[o], mb_synth_polys_count(p, o));
    mb_coverage_resolve(cov);
    mb_blur_gauss(cov->cells, cov->width, cov->height, cov->stride,
                  g->cfg.blur_sigma, g->work);
}

/* Compose the frame: background, part, contamination, noise; over the
   whole frame, or with `over` only inside the window win (the rest of the
   frame is left as it is) on the belt texture of empty frame `under`. */
typedef struct {
    const int *win;  /* x0, y0, x1, y1 (exclusive) */
    uint64_t under;  /* the empty frame whose texture offset is used */
} compose_over;

static void texture_offset(const mb_synth *g, uint64_t index, int shot,
                           mb_synth_rng *r, int *ox, int *oy)
{
    mb_synth_rng_seed(r, g->cfg.seed, MB_SYNTH_STREAM_NOISE, index, shot);
    /* the belt moved since the last part: a new texture offset */
    *ox = (int)(mb_synth_rng_u64(r) & (TEX_SIZE - 1));
    *oy = (int)(mb_synth_rng_u64(r) & (TEX_SIZE - 1));
}

static void compose(mb_synth *g, mb_image *frame, uint64_t index, int shot,
                    const mb_coverage *cp, const mb_coverage *cc,
                    const compose_over *over)
{
    const mb_synth_config *c = &g->cfg;
    mb_synth_rng r;
    int ox, oy;
    if (over) {
        texture_offset(g, over->under, 0, &r, &ox, &oy);
        int unused_x, unused_y;
        texture_offset(g, index, shot, &r, &unused_x, &unused_y);
    } else {
        texture_offset(g, index, shot, &r, &ox, &oy);
    }
    int x0 = over ? over->win[0] : 0, y0 = over ? over->win[1] : 0;
    int x1 = over ? over->win[2] : c->width, y1 = over ? over->win[3] : c->height;
    int front = c->lighting == MB_SYNTH_FRONTLIT;
    int noisy = c->noise_sigma > 0;
    uint64_t bits = 0;
    int nbits = 0;
    float part = (float)g->grey_part, contam = (float)g->grey_contam;
    for (int y = y0; y < y1; y++) {
        const float *bg = g->bg + (size_t)y * (size_t)c->width;
        const float *il = g->illum + (size_t)y * (size_t)c->width;
        const float *tex =
            g->tex + (size_t)((y + oy) & (TEX_SIZE - 1)) * TEX_SIZE;
        uint8_t *out = frame->pixels + (size_t)y * (size_t)frame->stride;
        int ya = cp && y >= cp->y0 && y < cp->y0 + cp->height;
        int yc = cc && y >= cc->y0 && y < cc->y0 + cc->height;
        const float *ap =
            ya ? cp->cells + (size_t)(y - cp->y0) * (size_t)cp->stride : NULL;
        const float *ac =
            yc ? cc->cells + (size_t)(y - cc->y0) * (size_t)cc->stride : NULL;
        for (int x = x0; x < x1; x++) {
            float v = bg[x];
            if (front)
                v += il[x] * tex[(x + ox) & (TEX_SIZE - 1)];
            if (ap && x >= cp->x0 && x < cp->x0 + cp->width) {
                float a = ap[x - cp->x0];
                float pl = front ? part * il[x] : part;
                v += (pl - v) * a;
            }
            if (ac && x >= cc->x0 && x < cc->x0 + cc->width) {
                float a = ac[x - cc->x0];
                float cl = front ? contam * il[x] : contam;
                v += (cl - v) * a;
            }
            if (noisy) {
                if (nbits == 0) {
                    bits = mb_synth_rng_u64(&r);
                    nbits = 4;
                }
                v += g->noise[bits & (NOISE_TABLE - 1)];
                bits >>= 16;
                nbits--;
            }
            out[x] = v <= 0.0f ? 0 : (v >= 255.0f ? 255 : (uint8_t)(v + 0.5f));
        }
    }
}

static void fill_truth_header(const mb_synth *g, uint64_t index, int shot,
                              mb_synth_truth *t)
{
    const mb_synth_config *c = &g->cfg;
    memset(t, 0, sizeof *t);
    t->family = c->family;
    t->part_number = g->fam->part_number;
    t->seed = c->seed;
    t->index = index;
    t->shot = shot;
    t->width = c->width;
    t->height = c->height;
    t->mm_per_px = c->mm_per_px;
    t->lighting = c->lighting;
    t->noise_sigma = c->noise_sigma;
    t->blur_sigma = c->blur_sigma;
    t->grey_part = g->grey_part;
    t->grey_background = g->grey_bg;
    t->pose.scale = 1.0 / c->mm_per_px;
    t->size = 1.0;
    t->defect.outline = -1;
    t->defect.arc = -1;
}

/* One frame; `at` (px, angle; its scale is ignored) replaces the drawn
   placement when not NULL. */
static int make_frame(mb_synth *g, uint64_t index, int shot, int defect,
                      const mb_pose *at, const uint64_t *under, mb_image *frame,
                      mb_synth_truth *truth)
{
    if (!g || !frame || !frame->pixels || shot < 0)
        return MB_EINVAL;
    const mb_synth_config *c = &g->cfg;
    if (frame->width != c->width || frame->height != c->height ||
        frame->stride < frame->width)
        return MB_ESIZE;
    if (defect == MB_SYNTH_DRAW)
        defect = draw_defect_type(g, index);
    if (defect < 0 || defect >= MB_SYNTH_N_DEFECTS)
        return MB_EINVAL;
    mb_synth_truth local;
    mb_synth_truth *t = truth ? truth : &local;
    fill_truth_header(g, index, shot, t);
    t->defect.type = defect;
    mb_synth_polys_clear(&g->part);
    mb_synth_polys_clear(&g->contam);
    if (defect == MB_SYNTH_EMPTY) {
        if (!under) /* over an empty frame: nothing to draw */
            compose(g, frame, index, shot, NULL, NULL, NULL);
        t->present = 0;
        t->in_view = 0;
        t->good = 0;
        return 0;
    }

    /* the physical part, then its defect */
    mb_synth_rng r;
    mb_synth_shape shape;
    mb_synth_rng_seed(&r, c->seed, MB_SYNTH_STREAM_SHAPE, index, 0);
    mb_synth_shape_draw(g->fam, c->variation, &r, &shape);
    if (c->drift_per_part != 0.0) {
        /* the line's slow drift, held within the frame's allowance */
        double creep = c->drift_per_part * (double)index;
        shape.size *= 1.0 + fmax(-0.05, fmin(0.05, creep));
    }
    mb_synth_shape_build(g->fam, &shape, g->step, &g->part);
    if (g->part.overflow)
        return MB_ERANGE;
    mb_synth_defect d;
    memset(&d, 0, sizeof d);
    d.type = defect;
    d.outline = -1;
    d.arc = -1;
    if (defect != MB_SYNTH_NONE && defect != MB_SYNTH_CUT) {
        mb_synth_defect_opts o = {c->defect_min_mm, c->defect_max_mm, g->step,
                                  c->variation};
        mb_synth_rng_seed(&r, c->seed, MB_SYNTH_STREAM_DEFECT, index, 0);
        int rc = mb_synth_defect_apply(g->fam, defect, &o, &r, &shape, &g->part,
                                       &g->contam, &g->sc, &d);
        if (rc < 0)
            return rc;
    }

    /* placement, pixels */
    mb_pose pose = {0, 0, 1.0 / c->mm_per_px, 0};
    mb_synth_defect cut_d = d;
    if (at) {
        if (defect == MB_SYNTH_CUT || !isfinite(at->tx) ||
            !isfinite(at->ty) || !isfinite(at->angle))
            return MB_EINVAL;
        pose.tx = at->tx;
        pose.ty = at->ty;
        pose.angle = at->angle;
    } else if (place(g, index, shot, defect == MB_SYNTH_CUT, &pose, &cut_d) <
               0) {
        return MB_ERANGE;
    }
    to_pixels(&pose, &g->part, g->truth_xy);
    to_pixels(&pose, &g->contam, g->contam_xy);
    if (defect == MB_SYNTH_CUT) {
        d = cut_d;
    } else if (defect != MB_SYNTH_NONE) {
        double px = cos(pose.angle) * pose.scale * d.x -
                    sin(pose.angle) * pose.scale * d.y + pose.tx;
        double py = sin(pose.angle) * pose.scale * d.x +
                    cos(pose.angle) * pose.scale * d.y + pose.ty;
        d.x = px;
        d.y = py;
    }
    d.angle =
        (defect == MB_SYNTH_NONE) ? 0 : atan2(d.y - pose.ty, d.x - pose.tx);

    /* render: a window around all geometry, blur margin included */
    double box[4] = {INFINITY, -INFINITY, INFINITY, -INFINITY};
    for (int i = 0; i < g->part.n; i++) {
        box[0] = fmin(box[0], g->truth_xy[2 * i]);
        box[1] = fmax(box[1], g->truth_xy[2 * i]);
        box[2] = fmin(box[2], g->truth_xy[2 * i + 1]);
        box[3] = fmax(box[3], g->truth_xy[2 * i + 1]);
    }
    int in_view = box[0] >= g->margin && box[1] <= c->width - 1 - g->margin &&
                  box[2] >= g->margin && box[3] <= c->height - 1 - g->margin;
    for (int i = 0; i < g->contam.n; i++) {
        box[0] = fmin(box[0], g->contam_xy[2 * i]);
        box[1] = fmax(box[1], g->contam_xy[2 * i]);
        box[2] = fmin(box[2], g->contam_xy[2 * i + 1]);
        box[3] = fmax(box[3], g->contam_xy[2 * i + 1]);
    }
    int pad = (int)ceil(3 * c->blur_sigma) + 2;
    int win[4] = {(int)floor(box[0]) - pad, (int)floor(box[2]) - pad,
                  (int)ceil(box[1]) + pad + 1, (int)ceil(box[3]) + pad + 1};
    win[0] = win[0] < 0 ? 0 : win[0];
    win[1] = win[1] < 0 ? 0 : win[1];
    win[2] = win[2] > c->width ? c->width : win[2];
    win[3] = win[3] > c->height ? c->height : win[3];
    mb_coverage cp, cc;
    int has_win = win[2] > win[0] && win[3] > win[1];
    if (has_win)
        render_layer(g, &g->part, g->truth_xy, win, g->cov, &cp);
    int has_contam = has_win && g->contam.n_outlines > 0;
    if (has_contam)
        render_layer(g, &g->contam, g->contam_xy, win, g->cov2, &cc);
    if (!under) {
        compose(g, frame, index, shot, has_win ? &cp : NULL,
                has_contam ? &cc : NULL, NULL);
    } else if (has_win) {
        compose_over over = {win, *under};
        compose(g, frame, index, shot, &cp, has_contam ? &cc : NULL, &over);
    }

    /* truth */
    t->present = 1;
    t->in_view = in_view;
    t->good = defect == MB_SYNTH_NONE && in_view;
    t->pose = pose;
    t->size = shape.size;
    t->defect = d;
    t->outlines.n_outlines = g->part.n_outlines;
    for (int o = 0; o < g->part.n_outlines; o++)
        t->outlines.counts[o] = mb_synth_polys_count(&g->part, o);
    t->outlines.xy = g->truth_xy;
    return 0;
}

int mb_synth_make(mb_synth *g, uint64_t index, int shot, int defect,
                  mb_image *frame, mb_synth_truth *truth)
{
    return make_frame(g, index, shot, defect, NULL, NULL, frame, truth);
}

int mb_synth_make_at(mb_synth *g, uint64_t index, int shot, int defect,
                     const mb_pose *pose, mb_image *frame,
                     mb_synth_truth *truth)
{
    if (!pose)
        return MB_EINVAL;
    return make_frame(g, index, shot, defect, pose, NULL, frame, truth);
}

int mb_synth_make_over(mb_synth *g, uint64_t index, int shot, int defect,
                       const mb_pose *pose, uint64_t under, mb_image *frame,
                       mb_synth_truth *truth)
{
    if (!pose)
        return MB_EINVAL;
    return make_frame(g, index, shot, defect, pose, &under, frame, truth);
}

int mb_synth_next(mb_synth *g, mb_image *frame, mb_synth_truth *truth)
{
    if (!g)
        return MB_EINVAL;
    int rc = mb_synth_make(g, g->next_index, 0, MB_SYNTH_DRAW, frame, truth);
    g->next_index++;
    return rc;
}

int mb_synth_max_points(const mb_synth *g)
{
    return g ? g->part.cap : 0;
}
