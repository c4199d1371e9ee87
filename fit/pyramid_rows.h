/*
 * fit/pyramid_rows.h - the reduction of one pyramid level (fit/pyramid.c),
 * written once and compiled once per vector width. Not a public header:
 * pyramid.c includes it with
 *
 *     ROWS_LANES      16-bit lanes per vector (8 or 16), or 0 for plain C
 *     ROWS_NAME(x)    the name given to helper x in this copy
 *     ROWS_TARGET     a function attribute (the instruction set), or nothing
 *     ROWS_EVEN(a, b), ROWS_ODD(a, b)
 *                     the even and odd lanes of the 2 * ROWS_LANES lanes a:b
 *
 * and undefines them after. Every copy computes the same integers (see
 * pyramid.c), so the levels do not depend on the copy the CPU runs.
 *
 * Two output rows share three of their five source rows, so they are made
 * together from seven rows, each read once: the vertical 1 4 6 4 1 sums of
 * both into t0 and t1 (contiguous, vectorises), then the horizontal sum at
 * every other column of each. 16-bit lanes are exact: a vertical sum is at
 * most 16 * 255, a full sum plus 128 at most 256 * 255 + 128 < 2^16.
 */

#if ROWS_LANES
typedef uint8_t ROWS_NAME(u8v) __attribute__((vector_size(ROWS_LANES)));
typedef uint16_t ROWS_NAME(u16v) __attribute__((vector_size(2 * ROWS_LANES)));

ROWS_TARGET static inline ROWS_NAME(u16v) ROWS_NAME(widen)(const uint8_t *p)
{
    ROWS_NAME(u8v) v;
    memcpy(&v, p, sizeof v);
    return __builtin_convertvector(v, ROWS_NAME(u16v));
}

ROWS_TARGET static inline ROWS_NAME(u16v) ROWS_NAME(load)(const uint16_t *p)
{
    ROWS_NAME(u16v) v;
    memcpy(&v, p, sizeof v);
    return v;
}
#endif

/* t0[x] = 1 4 6 4 1 sum of rows r[0..4] at column x, t1[x] of r[2..6]. */
ROWS_TARGET static void ROWS_NAME(column_sums)(const uint8_t *const *r,
                                               uint16_t *restrict t0,
                                               uint16_t *restrict t1, int w)
{
    int x = 0;
#if ROWS_LANES
    for (; x + ROWS_LANES <= w; x += ROWS_LANES) {
        ROWS_NAME(u16v) a = ROWS_NAME(widen)(r[0] + x), b = ROWS_NAME(widen)(r[1] + x);
        ROWS_NAME(u16v) c = ROWS_NAME(widen)(r[2] + x), d = ROWS_NAME(widen)(r[3] + x);
        ROWS_NAME(u16v) e = ROWS_NAME(widen)(r[4] + x), f = ROWS_NAME(widen)(r[5] + x);
        ROWS_NAME(u16v) g = ROWS_NAME(widen)(r[6] + x);
        ROWS_NAME(u16v) s0 = a + e + 4 * (b + d) + 6 * c;
        ROWS_NAME(u16v) s1 = c + g + 4 * (d + f) + 6 * e;
        memcpy(t0 + x, &s0, sizeof s0);
        memcpy(t1 + x, &s1, sizeof s1);
    }
#endif
    for (; x < w; x++) {
        t0[x] = (uint16_t)(r[0][x] + r[4][x] + 4 * (r[1][x] + r[3][x]) + 6 * r[2][x]);
        t1[x] = (uint16_t)(r[2][x] + r[6][x] + 4 * (r[3][x] + r[5][x]) + 6 * r[4][x]);
    }
}

/* o[i] = round(1 4 6 4 1 sum of t[2i-2 .. 2i+2] / 256) for i < n; t must be
   readable from index -2 to 2n + 1 (and, for the vector loop, to
   2n + 2 ROWS_LANES: the row buffer is padded for it). */
ROWS_TARGET static void ROWS_NAME(row_reduce)(const uint16_t *restrict t,
                                              uint8_t *restrict o, int n)
{
    int i = 0;
#if ROWS_LANES
    for (; i + ROWS_LANES <= n; i += ROWS_LANES) {
        const uint16_t *c = t + 2 * i;
        /* t[c-2 ..], t[c ..], t[c+2 ..], each 2 * ROWS_LANES long */
        ROWS_NAME(u16v) a0 = ROWS_NAME(load)(c - 2), b0 = ROWS_NAME(load)(c - 2 + ROWS_LANES);
        ROWS_NAME(u16v) a2 = ROWS_NAME(load)(c), b2 = ROWS_NAME(load)(c + ROWS_LANES);
        ROWS_NAME(u16v) a4 = ROWS_NAME(load)(c + 2), b4 = ROWS_NAME(load)(c + 2 + ROWS_LANES);
        ROWS_NAME(u16v) s = ROWS_EVEN(a0, b0) + ROWS_EVEN(a4, b4) +
                            4 * (ROWS_ODD(a0, b0) + ROWS_ODD(a2, b2)) + 6 * ROWS_EVEN(a2, b2) +
                            128;
        ROWS_NAME(u8v) b = __builtin_convertvector(s >> 8, ROWS_NAME(u8v));
        memcpy(o + i, &b, sizeof b);
    }
#endif
    for (; i < n; i++) {
        const uint16_t *c = t + 2 * i;
        uint32_t s = (uint32_t)c[-2] + c[2] + 4u * ((uint32_t)c[-1] + c[1]) + 6u * c[0];
        o[i] = (uint8_t)((s + 128u) >> 8);
    }
}

/* dst = decimate(binomial(src)), dst->width == (src->width + 1) / 2 etc.
   rows: two row buffers of ROW_LEN(src->width) entries. */
ROWS_TARGET static void ROWS_NAME(reduce)(const mb_image *src, mb_image *dst,
                                          uint16_t *rows)
{
    const int w = src->width, h = src->height;
    uint16_t *t0 = rows + ROW_PAD, *t1 = rows + ROW_LEN(w) + ROW_PAD;
    for (int j = 0; j < dst->height; j += 2) {
        /* rows 2j-2 .. 2j+4, clamped; with an odd height the last t1 is
           made and not used */
        const uint8_t *r[7];
        for (int k = 0; k < 7; k++)
            r[k] = src->pixels + (size_t)clampi(2 * j - 2 + k, 0, h - 1) * src->stride;
        ROWS_NAME(column_sums)(r, t0, t1, w);
        for (int q = 0; q < 2 && j + q < dst->height; q++) {
            uint16_t *t = q ? t1 : t0;
            /* clamp to the nearest edge column */
            t[-2] = t[-1] = t[0];
            t[w] = t[w + 1] = t[w - 1];
            ROWS_NAME(row_reduce)(t, dst->pixels + (size_t)(j + q) * dst->stride, dst->width);
        }
    }
}
