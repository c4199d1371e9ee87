/*
 * capture/synth_source.c - the synthetic line as a live source: which part
 * is where on the belt in frame k, its pose, and the pacing.
 *
 * Slot arithmetic: with s = speed * k, the slot whose origin is in
 * [-R, pitch - R) is j = floor(s / pitch); since pitch >= W + 2R, slot j - 1
 * is already past the right edge (x >= W + R) and slot j + 1 has not
 * reached the left one, so at most one part is in the field. Slot j is in
 * the field while x_j < W + R.
 */
#include "synth_source.h"

#include "error.h"
#include "synth_internal.h"

#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Index space of the empty frames between slots (noise seeds only). */
#define GAP_INDEX (UINT64_C(1) << 63)
/* Empty belt frames rendered once at open; frame k starts as a copy of
   empty frame k mod N_EMPTY and only the part's window is drawn over it. */
#define N_EMPTY 4

typedef struct {
    mb_synth_source_config cfg;
    mb_synth *g;
    mb_image frame;
    mb_image empty[N_EMPTY];
    double radius;     /* R, px */
    double pitch;      /* px */
    double y_lo, y_hi; /* range of the lateral position, px */
    int64_t t0;        /* CLOCK_MONOTONIC of frame 0, ns */
    int started;       /* t0 is set */
    uint64_t next_k;
    int have_truth;
    mb_synth_source_truth truth;
} synth_src;

static const mb_source_ops synth_ops;

void mb_synth_source_config_default(mb_synth_source_config *cfg,
                                    mb_synth_family family)
{
    if (!cfg)
        return;
    memset(cfg, 0, sizeof *cfg);
    mb_synth_config_default(&cfg->synth, family);
    cfg->speed_px = 60;
    cfg->pitch_px = 0;
    cfg->fps = 0;
    cfg->drop_late = 0;
    cfg->max_frames = 0;
}

/* Lateral position and rotation of slot j: fixed per slot, from the seed. */
static void slot_pose(const synth_src *s, uint64_t j, double *y, double *a)
{
    mb_synth_rng r;
    /* tag 0x5107 keeps this stream apart from the generator's own */
    mb_synth_rng_seed(&r, s->cfg.synth.seed, 0x5107, j, 0);
    *y = s->y_hi > s->y_lo ? mb_synth_rng_range(&r, s->y_lo, s->y_hi)
                           : 0.5 * (s->y_lo + s->y_hi);
    *a = mb_synth_rng_range(&r, 0, 2 * M_PI);
}

static void copy_pixels(const mb_image *from, mb_image *to)
{
    for (int y = 0; y < from->height; y++)
        memcpy(to->pixels + (size_t)y * (size_t)to->stride,
               from->pixels + (size_t)y * (size_t)from->stride,
               (size_t)from->width);
}

/* Render frame k into s->frame and its truth: a copy of an empty belt
   frame with the part's window drawn over it. */
static int render(synth_src *s, uint64_t k)
{
    const mb_synth_config *c = &s->cfg.synth;
    uint64_t under = k % N_EMPTY;
    copy_pixels(&s->empty[under], &s->frame);
    under |= GAP_INDEX;
    double travel = s->cfg.speed_px * (double)k;
    uint64_t j = (uint64_t)floor(travel / s->pitch);
    double x = -s->radius + travel - s->pitch * (double)j;
    mb_synth_source_truth *t = &s->truth;
    t->frame = k;
    mb_pose pose = {0, 0, 1.0 / c->mm_per_px, 0};
    if (x >= c->width + s->radius) {
        t->part = -1;
        return mb_synth_make_over(s->g, under, 0, MB_SYNTH_EMPTY, &pose,
                                  under, &s->frame, &t->truth);
    }
    /* how many frames slot j was in the field before this one */
    double first = ceil((double)j * s->pitch / s->cfg.speed_px - 1e-9);
    double shot_d = (double)k - first;
    int shot = shot_d < 0 ? 0 : (shot_d > INT_MAX ? INT_MAX : (int)shot_d);
    pose.tx = x;
    slot_pose(s, j, &pose.ty, &pose.angle);
    t->part = (int64_t)j;
    int rc = mb_synth_make_over(s->g, j, shot, MB_SYNTH_DRAW, &pose, under,
                                &s->frame, &t->truth);
    if (rc == MB_ERANGE) /* the drawn defect found no place: a good part */
        rc = mb_synth_make_over(s->g, j, shot, MB_SYNTH_NONE, &pose, under,
                                &s->frame, &t->truth);
    return rc;
}

static int synth_next(void *impl, int timeout_ms, mb_frame *out,
                      mb_source_stats *stats, char *err)
{
    (void)stats;
    synth_src *s = impl;
    uint64_t k = s->next_k;
    int64_t t_ns;
    if (s->cfg.fps > 0) {
        double period = 1e9 / s->cfg.fps;
        if (!s->started) { /* the clock starts with the first request */
            s->t0 = mb_source_clock_ns();
            s->started = 1;
        }
        if (s->cfg.drop_late) {
            double late = (double)(mb_source_clock_ns() - s->t0) / period;
            if (late > (double)k)
                k = (uint64_t)late;
        }
        if (s->cfg.max_frames && k >= s->cfg.max_frames)
            return mb_err_set(err, MB_ENOTFOUND,
                              "synthetic line: all %llu frames made",
                              (unsigned long long)s->cfg.max_frames);
        t_ns = s->t0 + (int64_t)llround((double)k * period);
        int rc = mb_source_sleep_until(t_ns, timeout_ms);
        if (rc < 0)
            return rc;
    } else {
        if (s->cfg.max_frames && k >= s->cfg.max_frames)
            return mb_err_set(err, MB_ENOTFOUND,
                              "synthetic line: all %llu frames made",
                              (unsigned long long)s->cfg.max_frames);
        t_ns = mb_source_clock_ns();
    }
    int rc = render(s, k);
    if (rc < 0) {
        s->have_truth = 0;
        return mb_err_set(err, MB_EIO,
                          "synthetic line: frame %llu could not be made (%s)",
                          (unsigned long long)k, mb_strerror(rc));
    }
    s->have_truth = 1;
    s->next_k = k + 1;
    out->view = s->frame;
    out->seq = k;
    out->t_ns = t_ns;
    return 0;
}

static void synth_close(void *impl)
{
    synth_src *s = impl;
    if (!s)
        return;
    mb_synth_close(s->g);
    mb_image_free(&s->frame);
    for (int i = 0; i < N_EMPTY; i++)
        mb_image_free(&s->empty[i]);
    free(s);
}

static const mb_source_ops synth_ops = {"synth", synth_next, NULL, synth_close};

/* R from the nominal part: the farthest outline point from the part
   origin, 20 % more for variation and defects that change size, 2 mm for
   flash and contamination, and the blur margin. */
static int measure_radius(synth_src *s, char *err)
{
    const mb_synth_config *c = &s->cfg.synth;
    mb_synth_config nc = *c;
    nc.variation = 0;
    nc.defect_rate = 0;
    nc.noise_sigma = 0;
    mb_synth *probe = NULL;
    int rc = mb_synth_open(&nc, &probe, err);
    if (rc < 0)
        return rc;
    mb_synth_truth t;
    rc = mb_synth_make(probe, 0, 0, MB_SYNTH_NONE, &s->frame, &t);
    if (rc < 0) {
        mb_synth_close(probe);
        return mb_err_set(err, rc,
                          "synthetic line: the nominal part could "
                          "not be made");
    }
    double r0 = 0;
    int n = 0;
    for (int o = 0; o < t.outlines.n_outlines; o++)
        n += t.outlines.counts[o];
    for (int i = 0; i < n; i++)
        r0 = fmax(r0, hypot(t.outlines.xy[2 * i] - t.pose.tx,
                            t.outlines.xy[2 * i + 1] - t.pose.ty));
    mb_synth_close(probe);
    double margin = ceil(3 * c->blur_sigma) + 2;
    s->radius = ceil(1.2 * r0 + 2.0 / c->mm_per_px + margin);
    /* lateral range: the part wholly inside the frame when it can be */
    double ry = ceil(1.1 * r0 + margin);
    s->y_lo = ry;
    s->y_hi = c->height - 1 - ry;
    if (s->y_hi < s->y_lo)
        s->y_lo = s->y_hi = 0.5 * (c->height - 1);
    return 0;
}

int mb_synth_source_open(const mb_synth_source_config *cfg, mb_source **out,
                         char *err)
{
    if (out)
        *out = NULL;
    if (!cfg || !out)
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: no configuration given");
    if (!(cfg->speed_px > 0) || !isfinite(cfg->speed_px))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: speed_px must be > 0 px per "
                          "frame (got %g)",
                          cfg->speed_px);
    if (!(cfg->fps >= 0) || !isfinite(cfg->fps) || cfg->fps > 100000)
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: fps must be 0 (as fast as "
                          "asked) or up to 100000 (got %g)",
                          cfg->fps);
    if (!(cfg->pitch_px >= 0) || !isfinite(cfg->pitch_px))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: pitch_px must be >= 0 (got %g)",
                          cfg->pitch_px);
    synth_src *s = calloc(1, sizeof *s);
    if (!s)
        return mb_err_set(err, MB_ENOMEM, "synthetic line: out of memory");
    s->cfg = *cfg;
    /* a pose is given for every part: CUT cannot be drawn */
    s->cfg.synth.defect_mask &= ~(1u << MB_SYNTH_CUT);
    int rc = mb_synth_open(&s->cfg.synth, &s->g, err);
    if (rc < 0)
        goto fail;
    rc = mb_image_alloc(s->cfg.synth.width, s->cfg.synth.height, &s->frame);
    if (rc < 0) {
        mb_err_set(err, rc, "synthetic line: out of memory");
        goto fail;
    }
    for (int i = 0; i < N_EMPTY; i++) {
        rc = mb_image_alloc(s->cfg.synth.width, s->cfg.synth.height,
                            &s->empty[i]);
        if (rc == 0)
            rc = mb_synth_make(s->g, GAP_INDEX | (uint64_t)i, 0, MB_SYNTH_EMPTY,
                               &s->empty[i], NULL);
        if (rc < 0) {
            mb_err_set(err, rc, "synthetic line: the empty belt frames could "
                                "not be made (%s)", mb_strerror(rc));
            goto fail;
        }
    }
    rc = measure_radius(s, err);
    if (rc < 0)
        goto fail;
    double min_pitch = s->cfg.synth.width + 2 * s->radius;
    if (cfg->pitch_px == 0) {
        s->pitch = min_pitch;
    } else if (cfg->pitch_px < min_pitch) {
        rc = mb_err_set(err, MB_EINVAL,
                        "synthetic line: pitch_px %g would put two parts in "
                        "view; it must be at least %g (frame width + 2 x "
                        "%g px)",
                        cfg->pitch_px, min_pitch, s->radius);
        goto fail;
    } else {
        s->pitch = cfg->pitch_px;
    }
    return mb_source_create(&synth_ops, s, out, err);
fail:
    synth_close(s);
    return rc;
}

const mb_synth_source_truth *mb_synth_source_truth_of(const mb_source *src)
{
    if (!src || mb_source_ops_of(src) != &synth_ops)
        return NULL;
    const synth_src *s = mb_source_impl(src);
    return s->have_truth ? &s->truth : NULL;
}

double mb_synth_source_radius(const mb_source *src)
{
    if (!src || mb_source_ops_of(src) != &synth_ops)
        return 0;
    const synth_src *s = mb_source_impl(src);
    return s->radius;
}

double mb_synth_source_pitch(const mb_source *src)
{
    if (!src || mb_source_ops_of(src) != &synth_ops)
        return 0;
    const synth_src *s = mb_source_impl(src);
    return s->pitch;
}
