/*
 * capture/synth_internal.h - what synth.c, synth_parts.c and
 * synth_defects.c share: the random streams, outline sets under
 * construction, the part families' parameter tables. Not a public header.
 */
#ifndef MB_SYNTH_INTERNAL_H
#define MB_SYNTH_INTERNAL_H

#include <math.h>
#include <stdint.h>

#include "shape.h"
#include "synth.h"

/* ---- random streams: xoshiro256** (Blackman and Vigna, "Scrambled linear
   pseudorandom number generators", ACM TOMS 2021), seeded by splitmix64. */

typedef struct {
    uint64_t s[4];
} mb_synth_rng;

/* Stream tags: one independent stream per purpose and part. */
enum {
    MB_SYNTH_STREAM_SHAPE = 1, /* the physical part: size, variation */
    MB_SYNTH_STREAM_KIND,      /* whether and which defect is drawn */
    MB_SYNTH_STREAM_DEFECT,    /* the defect's geometry */
    MB_SYNTH_STREAM_PLACE,     /* placement in the frame (per shot) */
    MB_SYNTH_STREAM_NOISE,     /* sensor noise (per shot) */
    MB_SYNTH_STREAM_STATION    /* illumination and belt texture */
};

static inline uint64_t mb_synth_splitmix(uint64_t *x)
{
    uint64_t z = (*x += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
}

static inline void mb_synth_rng_seed(mb_synth_rng *r, uint64_t seed, int tag,
                                     uint64_t index, int shot)
{
    uint64_t h = seed;
    h = mb_synth_splitmix(&h) ^ (uint64_t)tag;
    h = mb_synth_splitmix(&h) ^ index;
    h = mb_synth_splitmix(&h) ^ (uint64_t)(int64_t)shot;
    for (int i = 0; i < 4; i++)
        r->s[i] = mb_synth_splitmix(&h);
}

static inline uint64_t mb_synth_rng_u64(mb_synth_rng *r)
{
    uint64_t *s = r->s;
    uint64_t x = s[1] * 5, res = ((x << 7) | (x >> 57)) * 9, t = s[1] << 17;
    s[2] ^= s[0];
    s[3] ^= s[1];
    s[1] ^= s[2];
    s[0] ^= s[3];
    s[2] ^= t;
    s[3] = (s[3] << 45) | (s[3] >> 19);
    return res;
}

/** Uniform in [0, 1). */
static inline double mb_synth_rng_uniform(mb_synth_rng *r)
{
    return (double)(mb_synth_rng_u64(r) >> 11) * 0x1.0p-53;
}

/** Uniform in [lo, hi). */
static inline double mb_synth_rng_range(mb_synth_rng *r, double lo, double hi)
{
    return lo + (hi - lo) * mb_synth_rng_uniform(r);
}

/** Standard normal (Box-Muller, one value per call). */
static inline double mb_synth_rng_normal(mb_synth_rng *r)
{
    double u = 1.0 - mb_synth_rng_uniform(r), v = mb_synth_rng_uniform(r);
    return sqrt(-2.0 * log(u)) * cos(2.0 * M_PI * v);
}

/* ---- outline sets under construction (part frame, mm) */

typedef struct {
    double *xy; /* interleaved points */
    int n, cap; /* points used, capacity */
    int n_outlines;
    int first[MB_MAX_OUTLINES + 1]; /* first point of each outline;
                                       first[n_outlines] == n when closed */
    int overflow;                   /* set when a capacity was exceeded */
} mb_synth_polys;

void mb_synth_polys_clear(mb_synth_polys *p);
void mb_synth_polys_begin(mb_synth_polys *p);
void mb_synth_polys_point(mb_synth_polys *p, double x, double y);
/* Straight line from the last point to (x, y), points about `step` apart,
   (x, y) included. */
void mb_synth_polys_line(mb_synth_polys *p, double x, double y, double step);
/* Circular arc about (cx, cy), radius r, from angle a0 to a1 (radians; the
   sign of a1 - a0 gives the direction), points about `step` apart, both
   ends included (the start is skipped when it repeats the last point). */
void mb_synth_polys_arc(mb_synth_polys *p, double cx, double cy, double r,
                        double a0, double a1, double step);
/* Close the current outline (drops a last point equal to the first). */
void mb_synth_polys_end(mb_synth_polys *p);
/* Number of points of outline i. */
static inline int mb_synth_polys_count(const mb_synth_polys *p, int i)
{
    return p->first[i + 1] - p->first[i];
}
/* Make the outer edge (outline 0) positive in mb_polygon_area and every
   hole negative, reversing outlines as needed (the first point stays). */
void mb_synth_polys_orient(mb_synth_polys *p);
/* Copy src into dst (capacities permitting; else dst->overflow). */
void mb_synth_polys_copy(mb_synth_polys *dst, const mb_synth_polys *src);

/* ---- part families */

#define MB_SYNTH_MAX_PARAMS 16

/* One shape parameter of a family: nominal value and the standard deviation
   of its natural variation (drawn normal, truncated at 3 sd); sd < 0 means
   uniform over [nominal, nominal - sd) (used for axis angles). */
typedef struct {
    const char *name;
    double nominal;
    double sd;
} mb_synth_param;

/* A physical part before imaging. */
typedef struct {
    double size;                   /* size factor */
    double p[MB_SYNTH_MAX_PARAMS]; /* the family's parameters */
    int mirror;                    /* lipseal wrong variant */
    int hole_missing;              /* flange: bolt hole left out, or -1 */
} mb_synth_shape;

typedef struct {
    const char *name;
    const char *part_number;
    int n_params;
    mb_synth_param params[MB_SYNTH_MAX_PARAMS];
    double size_sd;   /* natural variation of the size factor */
    double main_mm;   /* main dimension for WRONG_SIZE's recorded size */
    int deform_param; /* parameter DEFORM pushes out of range */
    double deform_lo, deform_hi; /* how far beyond 3 sd, in sd units */
    /* Build the outlines of a part (part frame, mm, before size). */
    void (*build)(const mb_synth_shape *s, double step, mb_synth_polys *out);
} mb_synth_family_def;

const mb_synth_family_def *mb_synth_family_get(int family);

/* Draw a good part's shape from the shape stream. */
void mb_synth_shape_draw(const mb_synth_family_def *f, double variation,
                         mb_synth_rng *r, mb_synth_shape *s);

/* Build the outlines of shape s scaled by its size, oriented (outer edge
   positive), points about `step` mm apart. */
void mb_synth_shape_build(const mb_synth_family_def *f, const mb_synth_shape *s,
                          double step, mb_synth_polys *out);

/* ---- defects (synth_defects.c) */

/* Scratch for defect geometry, sized once by the generator. */
typedef struct {
    mb_synth_polys ref; /* the same part without the defect */
    mb_synth_polys tmp; /* working copy */
    double *arc;        /* cumulative arc length, cap + 1 */
    double *sorted;     /* 3 * cap doubles for the merge */
    int cap;
} mb_synth_scratch;

typedef struct {
    double min_mm, max_mm; /* override of local defect sizes when max > 0 */
    double step;           /* point spacing, mm */
    double variation;
} mb_synth_defect_opts;

/*
 * Turn shape/polys into a defective part of the given type (all types but
 * NONE, EMPTY and CUT), drawing from the defect stream r. On entry `shape`
 * holds the good part and `part` its outlines (mm, oriented); on return
 * `part` holds the defective outlines, `contam` the contamination polygon
 * (or no outlines), and d the defect in the part frame (x, y in mm).
 * Return value: 0; MB_ERANGE when no position fitted (rare; caller falls
 * back to a good part and says so in truth).
 */
int mb_synth_defect_apply(const mb_synth_family_def *f, int type,
                          const mb_synth_defect_opts *o, mb_synth_rng *r,
                          mb_synth_shape *shape, mb_synth_polys *part,
                          mb_synth_polys *contam, mb_synth_scratch *sc,
                          mb_synth_defect *d);

/* Largest distance of the points of a from the polylines of b (outline by
   outline; sets must have the same number of outlines). *at gets the index
   of that point of a. */
double mb_synth_max_deviation(const mb_synth_polys *a, const mb_synth_polys *b,
                              int *at);

#endif
