/*
 * io/shiftlog_read.c - streaming reader of the shift logs (see
 * shiftlog_read.h).
 *
 * Both parsers fill the record through the same member tables (name, type,
 * offset), so the scanner and the cJSON reference differ only in how they
 * tokenise. The scanner follows the JSON grammar of RFC 8259 and skips what
 * it does not need without building anything.
 *
 * Numbers: the decimal mantissa (up to 19 digits) and exponent are read as
 * integers; when the mantissa is below 2^53 and the power of ten at most
 * 10^22 one IEEE multiplication or division is exact and correctly rounded
 * (Clinger, "How to read floating point numbers accurately", PLDI 1990).
 * Otherwise, with an x87 long double (64-bit mantissa), the product or
 * quotient is formed in extended precision (10^k exact up to 10^27) and
 * rounded to double, unless it lies within two extended units of a halfway
 * point between doubles, where the two roundings could differ; those rare
 * cases, and everything else, go to strtod. So the result always equals
 * strtod's.
 */
#include "shiftlog_read.h"

#include "error.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---- member tables ---------------------------------------------------- */

typedef enum {
    F_STR,     /* char[size]; null gives "" */
    F_NUM,     /* double; null gives NAN */
    F_LONG,    /* long from an integral number */
    F_INT,     /* int */
    F_U32,     /* uint32_t, taken modulo 2^32 */
    F_I64,     /* int64_t */
    F_BOOL,    /* int 1/0 */
    F_VERDICT, /* mb_slog_verdict from a string */
    F_KIND,    /* kind_name, and kind from it */
    /* handled by the parsers themselves: */
    F_FORMAT, F_VERSION, F_REASONS, F_GAUGES, F_MODES, F_POSE
} field_type;

typedef struct {
    const char *key;
    size_t len; /* strlen(key) */
    field_type type;
    size_t offset, size;
} field;

#define R(member, t)                                                           \
    {#member, sizeof(#member) - 1, t, offsetof(mb_slog_record, member),        \
     sizeof(((mb_slog_record *)0)->member)}
#define RK(key, member, t)                                                     \
    {key, sizeof(key) - 1, t, offsetof(mb_slog_record, member),                \
     sizeof(((mb_slog_record *)0)->member)}
#define RX(key, t) {key, sizeof(key) - 1, t, 0, 0}

/* In the order the format lists the members (the writer's order), so the
   scanner's cyclic search (see lookup below) finds each key at its first
   try on a line the writer wrote. */
static const field top_fields[] = {
    RX("format", F_FORMAT),
    RX("version", F_VERSION),
    RK("kind", kind_name, F_KIND),
    R(time, F_STR),
    R(seq, F_U32),
    R(frame_seq, F_I64),
    R(slot, F_INT),
    R(part, F_STR),
    R(model_checksum, F_STR),
    R(verdict, F_VERDICT),
    R(reason, F_STR),
    R(code, F_INT),
    RX("reasons", F_REASONS),
    RX("pose", F_POSE),
    RX("modes", F_MODES),
    R(t2, F_NUM),
    R(residual, F_NUM),
    R(size_mm, F_NUM),
    RX("gauges", F_GAUGES),
    R(cycle_ms, F_NUM),
    R(image, F_STR),
    R(shift, F_STR),
    R(date, F_STR),
    R(station, F_STR),
    R(model, F_STR),
    R(parts, F_LONG),
    R(passes, F_LONG),
    R(rejects, F_LONG),
    R(faults, F_LONG),
    R(drift_signals, F_LONG),
    R(yield, F_NUM),
    R(chart, F_STR),
    R(state, F_STR),
    R(direction, F_STR),
    R(ewma, F_NUM),
    R(target, F_NUM),
    R(lcl, F_NUM),
    R(ucl, F_NUM),
    R(since_seq, F_U32),
    R(since_time, F_STR),
    R(parts_since, F_LONG),
    R(source, F_STR),
    R(text, F_STR),
    R(duration_s, F_NUM),
    R(event, F_STR),
    R(path, F_STR),
};
#define N_TOP (sizeof top_fields / sizeof top_fields[0])

#define RR(member, t)                                                          \
    {#member, sizeof(#member) - 1, t, offsetof(mb_slog_reason, member),        \
     sizeof(((mb_slog_reason *)0)->member)}
static const field reason_fields[] = {
    RR(code, F_INT),          RR(name, F_STR),       RR(text, F_STR),
    RR(value, F_NUM),         RR(limit, F_NUM),      RR(outline, F_INT),
    RR(position, F_NUM),      RR(angle_deg, F_NUM),  RR(depth_mm, F_NUM),
    RR(extent_mm, F_NUM),
};
#define RG(member, t)                                                          \
    {#member, sizeof(#member) - 1, t, offsetof(mb_slog_gauge, member),         \
     sizeof(((mb_slog_gauge *)0)->member)}
static const field gauge_fields[] = {
    RG(name, F_STR),       RG(value_mm, F_NUM),  RG(nominal_mm, F_NUM),
    RG(tol_lo_mm, F_NUM),  RG(tol_hi_mm, F_NUM), RG(ok, F_BOOL),
};
#define N_REASON_F (sizeof reason_fields / sizeof reason_fields[0])
#define N_GAUGE_F (sizeof gauge_fields / sizeof gauge_fields[0])

static const field *find_field(const field *t, size_t n, const char *key)
{
    for (size_t i = 0; i < n; i++)
        if (t[i].key[0] == key[0] && !strcmp(t[i].key, key))
            return &t[i];
    return NULL;
}

/* The scanner's key search: cyclic from just after the last match, so a
   line whose members come in table order costs one comparison per key. */
typedef struct {
    const field *tab;
    size_t n, next;
} lookup;

static const field *lookup_key(lookup *lk, const char *key, size_t len)
{
    size_t i = lk->next;
    for (size_t k = 0; k < lk->n; k++) {
        const field *f = &lk->tab[i];
        if (++i == lk->n)
            i = 0;
        if (f->len != len || f->key[0] != key[0])
            continue;
        size_t j = 1; /* keys are short: compare inline, not through memcmp */
        while (j < len && f->key[j] == key[j])
            j++;
        if (j == len) {
            lk->next = i;
            return f;
        }
    }
    return NULL;
}

/* A JSON value as both parsers present it to the setters. */
typedef enum { V_NULL, V_BOOL, V_NUM, V_STR, V_OTHER } vtype;

static void reset_reason(mb_slog_reason *r)
{
    r->code = 0;
    r->name[0] = r->text[0] = '\0';
    r->value = r->limit = NAN;
    r->outline = -1;
    r->position = r->angle_deg = r->depth_mm = r->extent_mm = NAN;
}

static void reset_gauge(mb_slog_gauge *g)
{
    g->name[0] = '\0';
    g->value_mm = g->nominal_mm = g->tol_lo_mm = g->tol_hi_mm = NAN;
    g->ok = -1;
}

/* Only what a previous line may have set; the arrays are reset per entry
   as they fill, so a record costs no big memset. */
static void reset_record(mb_slog_record *r)
{
    r->kind = MB_SLOG_OTHER;
    r->version = 0;
    r->kind_name[0] = r->time[0] = '\0';
    r->t_utc = r->t_local = NAN;
    r->shift[0] = r->date[0] = r->station[0] = r->model[0] = '\0';
    r->parts = r->passes = r->rejects = r->faults = r->drift_signals = -1;
    r->yield = NAN;
    r->seq = 0;
    r->frame_seq = -1;
    r->slot = -1;
    r->part[0] = r->model_checksum[0] = '\0';
    r->verdict = MB_SLOG_VERDICT_NONE;
    r->reason[0] = '\0';
    r->code = 0;
    r->n_reasons = 0;
    r->has_pose = 0;
    r->pose_x = r->pose_y = r->pose_angle = r->pose_scale = NAN;
    r->n_modes = 0;
    r->t2 = r->residual = r->size_mm = r->cycle_ms = NAN;
    r->n_gauges = 0;
    r->image[0] = '\0';
    r->chart[0] = r->state[0] = r->direction[0] = '\0';
    r->ewma = r->target = r->lcl = r->ucl = NAN;
    r->since_seq = 0;
    r->since_time[0] = '\0';
    r->parts_since = -1;
    r->source[0] = r->text[0] = '\0';
    r->duration_s = NAN;
    r->event[0] = r->path[0] = '\0';
}

/* Copy n bytes into dst[cap], cut at a UTF-8 character boundary. */
static void put_str(char *dst, size_t cap, const char *src, size_t n)
{
    if (n >= cap) {
        n = cap - 1;
        /* back off over a character cut in the middle */
        size_t k = n;
        while (k > 0 && ((unsigned char)src[k] & 0xC0) == 0x80)
            k--;
        n = k;
    }
    memcpy(dst, src, n);
    dst[n] = '\0';
}

static void set_kind(mb_slog_record *r)
{
    static const struct {
        const char *name;
        mb_slog_kind kind;
    } kinds[] = {{"part", MB_SLOG_PART},
                 {"drift", MB_SLOG_DRIFT},
                 {"fault", MB_SLOG_FAULT},
                 {"model", MB_SLOG_MODEL},
                 {"shift-start", MB_SLOG_SHIFT_START},
                 {"shift-end", MB_SLOG_SHIFT_END}};
    r->kind = MB_SLOG_OTHER;
    for (size_t i = 0; i < sizeof kinds / sizeof kinds[0]; i++)
        if (!strcmp(r->kind_name, kinds[i].name))
            r->kind = kinds[i].kind;
}

/* Store a value into the member f of base. A value of another type than
   the member's leaves the member as it was (tolerant reader). */
static void set_field(void *base, const field *f, vtype t, double num,
                      const char *str, size_t len)
{
    char *p = (char *)base + f->offset;
    switch (f->type) {
    case F_STR:
    case F_KIND:
        if (t == V_STR)
            put_str(p, f->size, str, len);
        else if (t == V_NULL)
            p[0] = '\0';
        break;
    case F_VERDICT:
        if (t == V_STR) {
            mb_slog_verdict v = MB_SLOG_VERDICT_NONE;
            if (len == 4 && !memcmp(str, "pass", 4))
                v = MB_SLOG_PASS;
            else if (len == 6 && !memcmp(str, "reject", 6))
                v = MB_SLOG_REJECT;
            else if (len == 5 && !memcmp(str, "fault", 5))
                v = MB_SLOG_FAULT_VERDICT;
            *(mb_slog_verdict *)(void *)p = v;
        }
        break;
    case F_NUM:
        if (t == V_NUM)
            *(double *)(void *)p = num;
        else if (t == V_NULL)
            *(double *)(void *)p = NAN;
        break;
    case F_LONG:
        if (t == V_NUM && fabs(num) < 9e15)
            *(long *)(void *)p = (long)num;
        break;
    case F_INT:
        if (t == V_NUM && fabs(num) < 2e9)
            *(int *)(void *)p = (int)num;
        break;
    case F_U32:
        if (t == V_NUM && num >= 0 && num < 1.8e19)
            *(uint32_t *)(void *)p = (uint32_t)(uint64_t)num;
        break;
    case F_I64:
        if (t == V_NUM && fabs(num) < 9.2e18)
            *(int64_t *)(void *)p = (int64_t)num;
        break;
    case F_BOOL:
        if (t == V_BOOL)
            *(int *)(void *)p = num != 0;
        break;
    default:
        break;
    }
}

/* Final checks shared by both parsers. */
static int finish(mb_slog_record *r, int have_format, int format_ok,
                  int have_version, double version, char *err)
{
    if (!have_format || !format_ok)
        return mb_err_set(err, MB_EFORMAT,
                          "not a shift-log line: \"format\" is missing or "
                          "not \"" MB_SHIFTLOG_FORMAT "\"");
    if (!have_version || version != floor(version) || version < 1 ||
        version > 1e6)
        return mb_err_set(err, MB_EFORMAT,
                          "\"version\": expected a positive integer");
    r->version = (int)version;
    if (r->kind_name[0] == '\0')
        return mb_err_set(err, MB_EFORMAT, "\"kind\" is missing");
    set_kind(r);
    if (r->version > MB_SHIFTLOG_VERSION)
        return mb_err_set(err, MB_EVERSION,
                          "format version %d is newer than this reader's %d",
                          r->version, MB_SHIFTLOG_VERSION);
    if (r->time[0] && mb_slog_parse_time(r->time, &r->t_utc, &r->t_local))
        r->t_utc = r->t_local = NAN;
    return 0;
}

/* ---- time ------------------------------------------------------------- */

/* Days since 1970-01-01 of a proleptic Gregorian date (the usual era
   arithmetic: 400-year cycles of 146097 days, March-based years). */
static long days_from_civil(long y, int m, int d)
{
    y -= m <= 2;
    long era = (y >= 0 ? y : y - 399) / 400;
    long yoe = y - era * 400;
    long doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
    long doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    return era * 146097 + doe - 719468;
}

static int digits(const char *s, int n, int *out)
{
    int v = 0;
    for (int i = 0; i < n; i++) {
        if (s[i] < '0' || s[i] > '9')
            return -1;
        v = v * 10 + (s[i] - '0');
    }
    *out = v;
    return 0;
}

int mb_slog_parse_time(const char *s, double *t_utc, double *t_local)
{
    int y, mo, d, h = 0, mi = 0, sec = 0;
    double frac = 0;
    if (!s || digits(s, 4, &y) || s[4] != '-' || digits(s + 5, 2, &mo) ||
        s[7] != '-' || digits(s + 8, 2, &d) || mo < 1 || mo > 12 || d < 1 ||
        d > 31)
        return MB_EFORMAT;
    const char *p = s + 10;
    if (*p == 'T' || *p == ' ') {
        if (digits(p + 1, 2, &h) || p[3] != ':' || digits(p + 4, 2, &mi) ||
            h > 23 || mi > 59)
            return MB_EFORMAT;
        p += 6;
        if (*p == ':') {
            if (digits(p + 1, 2, &sec) || sec > 60)
                return MB_EFORMAT;
            p += 3;
            if (*p == '.') {
                double scale = 0.1;
                p++;
                if (*p < '0' || *p > '9')
                    return MB_EFORMAT;
                while (*p >= '0' && *p <= '9') {
                    frac += (*p - '0') * scale;
                    scale *= 0.1;
                    p++;
                }
            }
        }
    }
    double local = (double)days_from_civil(y, mo, d) * 86400.0 + h * 3600.0 +
                   mi * 60.0 + sec + frac;
    double off = 0;
    if (*p == 'Z') {
        p++;
    } else if (*p == '+' || *p == '-') {
        int oh, om = 0;
        if (digits(p + 1, 2, &oh))
            return MB_EFORMAT;
        const char *q = p + 3;
        if (*q == ':')
            q++;
        if (*q >= '0' && *q <= '9') {
            if (digits(q, 2, &om))
                return MB_EFORMAT;
            q += 2;
        }
        off = (oh * 3600.0 + om * 60.0) * (*p == '-' ? -1 : 1);
        p = q;
    }
    if (*p != '\0')
        return MB_EFORMAT;
    *t_local = local;
    *t_utc = local - off;
    return 0;
}

/* ---- the scanner ------------------------------------------------------ */

typedef struct {
    const char *p, *end;
    char *sbuf; /* decoded string scratch, SBUF bytes */
} scan;

#define SBUF 4096
#define MAX_DEPTH 64

static void ws(scan *s)
{
    while (s->p < s->end &&
           (*s->p == ' ' || *s->p == '\t' || *s->p == '\n' || *s->p == '\r'))
        s->p++;
}

static int hex4(const char *p, unsigned *out)
{
    unsigned v = 0;
    for (int i = 0; i < 4; i++) {
        char c = p[i];
        v <<= 4;
        if (c >= '0' && c <= '9')
            v |= (unsigned)(c - '0');
        else if (c >= 'a' && c <= 'f')
            v |= (unsigned)(c - 'a' + 10);
        else if (c >= 'A' && c <= 'F')
            v |= (unsigned)(c - 'A' + 10);
        else
            return -1;
    }
    *out = v;
    return 0;
}

/* Read a string at s->p (on the opening quote). The decoded text goes to
   s->sbuf (cut at SBUF - 1 bytes; *len is what was kept). */
static int read_string(scan *s, size_t *len)
{
    const char *p = s->p + 1;
    size_t n = 0;
    for (;;) {
        /* copy the plain run fast */
        const char *q = p;
        while (q < s->end && *q != '"' && *q != '\\' &&
               (unsigned char)*q >= 0x20)
            q++;
        size_t run = (size_t)(q - p);
        if (n < SBUF - 1) {
            size_t k = run < SBUF - 1 - n ? run : SBUF - 1 - n;
            memcpy(s->sbuf + n, p, k);
            n += k;
        }
        p = q;
        if (p >= s->end)
            return -1;
        if (*p == '"')
            break;
        if ((unsigned char)*p < 0x20)
            return -1;
        /* an escape */
        if (p + 1 >= s->end)
            return -1;
        char out[4];
        int no = 1;
        switch (p[1]) {
        case '"': out[0] = '"'; break;
        case '\\': out[0] = '\\'; break;
        case '/': out[0] = '/'; break;
        case 'b': out[0] = '\b'; break;
        case 'f': out[0] = '\f'; break;
        case 'n': out[0] = '\n'; break;
        case 'r': out[0] = '\r'; break;
        case 't': out[0] = '\t'; break;
        case 'u': {
            unsigned c;
            if (s->end - p < 6 || hex4(p + 2, &c))
                return -1;
            p += 4;
            if (c >= 0xDC00 && c <= 0xDFFF)
                return -1;
            if (c >= 0xD800 && c <= 0xDBFF) {
                unsigned lo;
                if (s->end - p < 8 || p[2] != '\\' || p[3] != 'u' ||
                    hex4(p + 4, &lo) || lo < 0xDC00 || lo > 0xDFFF)
                    return -1;
                c = 0x10000 + ((c - 0xD800) << 10) + (lo - 0xDC00);
                p += 6;
            }
            if (c < 0x80) {
                out[0] = (char)c;
            } else if (c < 0x800) {
                out[0] = (char)(0xC0 | (c >> 6));
                out[1] = (char)(0x80 | (c & 0x3F));
                no = 2;
            } else if (c < 0x10000) {
                out[0] = (char)(0xE0 | (c >> 12));
                out[1] = (char)(0x80 | ((c >> 6) & 0x3F));
                out[2] = (char)(0x80 | (c & 0x3F));
                no = 3;
            } else {
                out[0] = (char)(0xF0 | (c >> 18));
                out[1] = (char)(0x80 | ((c >> 12) & 0x3F));
                out[2] = (char)(0x80 | ((c >> 6) & 0x3F));
                out[3] = (char)(0x80 | (c & 0x3F));
                no = 4;
            }
            break;
        }
        default:
            return -1;
        }
        p += 2;
        for (int i = 0; i < no && n < SBUF - 1; i++)
            s->sbuf[n++] = out[i];
    }
    s->sbuf[n] = '\0';
    s->p = p + 1;
    *len = n;
    return 0;
}

static const double pow10_tab[23] = {
    1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,  1e8,  1e9,  1e10, 1e11,
    1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};

#if LDBL_MANT_DIG == 64
static const long double pow10_ld[28] = {
    1e0L,  1e1L,  1e2L,  1e3L,  1e4L,  1e5L,  1e6L,  1e7L,  1e8L,  1e9L,
    1e10L, 1e11L, 1e12L, 1e13L, 1e14L, 1e15L, 1e16L, 1e17L, 1e18L, 1e19L,
    1e20L, 1e21L, 1e22L, 1e23L, 1e24L, 1e25L, 1e26L, 1e27L};
#endif

/* A number by the JSON grammar, converted as strtod would. */
static int read_number(scan *s, double *out)
{
    const char *start = s->p, *p = s->p;
    int neg = 0;
    if (p < s->end && *p == '-') {
        neg = 1;
        p++;
    }
    if (p >= s->end || *p < '0' || *p > '9')
        return -1;
    uint64_t m = 0;
    int nd = 0;     /* significant digits taken into m */
    int dropped = 0;/* significant digits beyond 19 (non-zero ones matter) */
    int e10 = 0;
    if (*p == '0') {
        p++;
    } else {
        while (p < s->end && *p >= '0' && *p <= '9') {
            if (nd < 19) {
                m = m * 10 + (uint64_t)(*p - '0');
                nd++;
            } else {
                e10++;
                dropped |= *p != '0';
            }
            p++;
        }
    }
    if (p < s->end && *p == '.') {
        p++;
        if (p >= s->end || *p < '0' || *p > '9')
            return -1;
        while (p < s->end && *p >= '0' && *p <= '9') {
            if (m == 0 && *p == '0') {
                e10--;
            } else if (nd < 19) {
                m = m * 10 + (uint64_t)(*p - '0');
                nd++;
                e10--;
            } else {
                dropped |= *p != '0';
            }
            p++;
        }
    }
    if (p < s->end && (*p == 'e' || *p == 'E')) {
        p++;
        int eneg = 0, ev = 0;
        if (p < s->end && (*p == '+' || *p == '-'))
            eneg = *p++ == '-';
        if (p >= s->end || *p < '0' || *p > '9')
            return -1;
        while (p < s->end && *p >= '0' && *p <= '9') {
            if (ev < 100000)
                ev = ev * 10 + (*p - '0');
            p++;
        }
        e10 += eneg ? -ev : ev;
    }
    s->p = p;
    double v;
    if (m == 0) {
        v = 0.0;
        goto done;
    }
    if (!dropped && m <= (UINT64_C(1) << 53) && e10 >= -22 && e10 <= 22) {
        v = e10 < 0 ? (double)m / pow10_tab[-e10] : (double)m * pow10_tab[e10];
        goto done;
    }
#if LDBL_MANT_DIG == 64
    if (!dropped && e10 >= -27 && e10 <= 27) {
        long double r = e10 < 0 ? (long double)m / pow10_ld[-e10]
                                : (long double)m * pow10_ld[e10];
        int ex;
        long double f = frexpl(r, &ex); /* 0.5 <= f < 1 */
        uint64_t bits = (uint64_t)ldexpl(f, 64);
        int low = (int)(bits & 0x7FF);
        if (ex > DBL_MIN_EXP && ex < DBL_MAX_EXP && (low < 0x3FE || low > 0x402)) {
            v = (double)r;
            goto done;
        }
    }
#endif
    {
        char tmp[64];
        size_t n = (size_t)(p - start);
        if (n < sizeof tmp) {
            memcpy(tmp, start, n);
            tmp[n] = '\0';
            v = strtod(tmp, NULL);
            *out = v;
            return 0;
        }
        /* absurdly long number text: copy to the heap */
        char *big = malloc(n + 1);
        if (!big)
            return -1;
        memcpy(big, start, n);
        big[n] = '\0';
        v = strtod(big, NULL);
        free(big);
        *out = v;
        return 0;
    }
done:
    *out = neg ? -v : v;
    return 0;
}

static int lit(scan *s, const char *word, size_t n)
{
    if ((size_t)(s->end - s->p) < n || memcmp(s->p, word, n))
        return -1;
    s->p += n;
    return 0;
}

static int skip_value(scan *s, int depth);

static int skip_container(scan *s, int depth, char close)
{
    if (depth > MAX_DEPTH)
        return -1;
    s->p++;
    ws(s);
    if (s->p < s->end && *s->p == close) {
        s->p++;
        return 0;
    }
    for (;;) {
        ws(s);
        if (close == '}') {
            size_t len;
            if (s->p >= s->end || *s->p != '"' || read_string(s, &len))
                return -1;
            ws(s);
            if (s->p >= s->end || *s->p != ':')
                return -1;
            s->p++;
            ws(s);
        }
        if (skip_value(s, depth + 1))
            return -1;
        ws(s);
        if (s->p >= s->end)
            return -1;
        if (*s->p == ',') {
            s->p++;
            continue;
        }
        if (*s->p == close) {
            s->p++;
            return 0;
        }
        return -1;
    }
}

/* Read any value; scalars are reported through t/num/len (strings in
   s->sbuf). Containers are skipped and reported as V_OTHER. */
static int read_value(scan *s, int depth, vtype *t, double *num, size_t *len)
{
    if (s->p >= s->end)
        return -1;
    char c = *s->p;
    *num = 0;
    *len = 0;
    switch (c) {
    case '"':
        *t = V_STR;
        return read_string(s, len);
    case '{':
        *t = V_OTHER;
        return skip_container(s, depth, '}');
    case '[':
        *t = V_OTHER;
        return skip_container(s, depth, ']');
    case 't':
        *t = V_BOOL;
        *num = 1;
        return lit(s, "true", 4);
    case 'f':
        *t = V_BOOL;
        return lit(s, "false", 5);
    case 'n':
        *t = V_NULL;
        return lit(s, "null", 4);
    default:
        *t = V_NUM;
        return read_number(s, num);
    }
}

static int skip_value(scan *s, int depth)
{
    vtype t;
    double num;
    size_t len;
    return read_value(s, depth, &t, &num, &len);
}

/* Read a key (decoded into s->sbuf, *len bytes) and the colon after it. */
static int read_key(scan *s, size_t *len)
{
    if (s->p >= s->end || *s->p != '"' || read_string(s, len))
        return -1;
    ws(s);
    if (s->p >= s->end || *s->p != ':')
        return -1;
    s->p++;
    ws(s);
    return 0;
}

/* After a member: ',' (returns 1, go on) or the closing char (returns 0). */
static int next_member(scan *s, char close)
{
    ws(s);
    if (s->p >= s->end)
        return -1;
    if (*s->p == ',') {
        s->p++;
        ws(s);
        return 1;
    }
    if (*s->p == close) {
        s->p++;
        return 0;
    }
    return -1;
}

/* An object of known members into base (reasons[i], gauges[i]). */
static int scan_object(scan *s, void *base, const field *tab, size_t n)
{
    s->p++;
    ws(s);
    if (s->p < s->end && *s->p == '}') {
        s->p++;
        return 0;
    }
    lookup lk = {tab, n, 0};
    for (;;) {
        vtype t;
        double num;
        size_t len;
        if (read_key(s, &len))
            return -1;
        const field *f = len ? lookup_key(&lk, s->sbuf, len) : NULL;
        if (read_value(s, 2, &t, &num, &len))
            return -1;
        if (f)
            set_field(base, f, t, num, s->sbuf, len);
        int r = next_member(s, '}');
        if (r < 0)
            return -1;
        if (r == 0)
            return 0;
    }
}

/* "reasons" / "gauges" / "modes": an array; other types are skipped. */
static int scan_array(scan *s, mb_slog_record *r, int which)
{
    if (s->p >= s->end || *s->p != '[')
        return skip_value(s, 1);
    if (which == 0)
        r->n_reasons = 0;
    else if (which == 1)
        r->n_gauges = 0;
    else
        r->n_modes = 0;
    s->p++;
    ws(s);
    if (s->p < s->end && *s->p == ']') {
        s->p++;
        return 0;
    }
    for (;;) {
        ws(s);
        if (s->p >= s->end)
            return -1;
        if (which == 2) {
            vtype t;
            double num;
            size_t len;
            if (read_value(s, 2, &t, &num, &len))
                return -1;
            if (r->n_modes < MB_SLOG_MAX_MODES)
                r->modes[r->n_modes++] = t == V_NUM ? num : NAN;
        } else if (*s->p == '{' &&
                   (which == 0 ? r->n_reasons < MB_SLOG_MAX_REASONS
                               : r->n_gauges < MB_SLOG_MAX_GAUGES)) {
            if (which == 0) {
                mb_slog_reason *e = &r->reasons[r->n_reasons++];
                reset_reason(e);
                if (scan_object(s, e, reason_fields, N_REASON_F))
                    return -1;
            } else {
                mb_slog_gauge *g = &r->gauges[r->n_gauges++];
                reset_gauge(g);
                if (scan_object(s, g, gauge_fields, N_GAUGE_F))
                    return -1;
            }
        } else if (skip_value(s, 2)) {
            return -1;
        }
        int k = next_member(s, ']');
        if (k < 0)
            return -1;
        if (k == 0)
            return 0;
    }
}

static int scan_pose(scan *s, mb_slog_record *r)
{
    if (s->p >= s->end || *s->p != '{') {
        if (s->p < s->end && *s->p == 'n') {
            r->has_pose = 0;
            return lit(s, "null", 4);
        }
        return skip_value(s, 1);
    }
    r->has_pose = 1;
    r->pose_x = r->pose_y = r->pose_angle = r->pose_scale = NAN;
    static const field pose_fields[] = {
        RK("x", pose_x, F_NUM), RK("y", pose_y, F_NUM),
        RK("angle", pose_angle, F_NUM), RK("scale", pose_scale, F_NUM)};
    return scan_object(s, r, pose_fields, 4);
}

static int parse_scan(const char *line, size_t len, mb_slog_record *r,
                      char *err)
{
    char sbuf[SBUF];
    scan s = {line, line + len, sbuf};
    int have_format = 0, format_ok = 0, have_version = 0;
    double version = 0;
    ws(&s);
    if (s.p >= s.end || *s.p != '{')
        return mb_err_set(err, MB_EFORMAT, "not a JSON object");
    s.p++;
    ws(&s);
    if (s.p < s.end && *s.p == '}') {
        s.p++;
    } else {
        lookup lk = {top_fields, N_TOP, 0};
        for (;;) {
            size_t klen;
            if (read_key(&s, &klen))
                goto bad;
            const field *f = klen ? lookup_key(&lk, sbuf, klen) : NULL;
            field_type ft = f ? f->type : F_STR;
            if (ft == F_REASONS || ft == F_GAUGES || ft == F_MODES) {
                if (scan_array(&s, r, ft == F_REASONS ? 0 : ft == F_GAUGES ? 1 : 2))
                    goto bad;
            } else if (ft == F_POSE) {
                if (scan_pose(&s, r))
                    goto bad;
            } else {
                vtype t;
                double num;
                size_t slen;
                if (read_value(&s, 1, &t, &num, &slen))
                    goto bad;
                if (!f) {
                    /* a member this reader does not know */
                } else if (ft == F_FORMAT) {
                    have_format = 1;
                    format_ok = t == V_STR && slen == sizeof MB_SHIFTLOG_FORMAT - 1 &&
                                !memcmp(sbuf, MB_SHIFTLOG_FORMAT, slen);
                } else if (ft == F_VERSION) {
                    have_version = t == V_NUM;
                    version = num;
                } else {
                    set_field(r, f, t, num, sbuf, slen);
                }
            }
            int k = next_member(&s, '}');
            if (k < 0)
                goto bad;
            if (k == 0)
                break;
        }
    }
    ws(&s);
    if (s.p != s.end)
        goto bad;
    return finish(r, have_format, format_ok, have_version, version, err);
bad:
    return mb_err_set(err, MB_EFORMAT, "not valid JSON (near byte %ld)",
                      (long)(s.p - line) + 1);
}

/* ---- the cJSON reference ---------------------------------------------- */

/* Store member v into field f of base, as the scanner would. */
static void cj_set(const cJSON *v, void *base, const field *f)
{
    vtype t;
    double num = 0;
    const char *str = "";
    size_t len = 0;
    if (cJSON_IsNull(v)) {
        t = V_NULL;
    } else if (cJSON_IsBool(v)) {
        t = V_BOOL;
        num = cJSON_IsTrue(v);
    } else if (cJSON_IsNumber(v)) {
        t = V_NUM;
        num = v->valuedouble;
    } else if (cJSON_IsString(v)) {
        t = V_STR;
        str = v->valuestring;
        len = strlen(v->valuestring);
        if (len > SBUF - 1)
            len = SBUF - 1; /* as the scanner's scratch */
    } else {
        t = V_OTHER;
    }
    set_field(base, f, t, num, str, len);
}

static void cj_object(const cJSON *o, void *base, const field *tab, size_t n)
{
    for (const cJSON *c = o->child; c; c = c->next) {
        if (!c->string || strlen(c->string) >= 32)
            continue;
        const field *f = find_field(tab, n, c->string);
        if (f)
            cj_set(c, base, f);
    }
}

static int parse_cjson(const char *line, size_t len, mb_slog_record *r,
                       char *err)
{
    cJSON *root = cJSON_ParseWithLength(line, len);
    if (!root)
        return mb_err_set(err, MB_EFORMAT, "not valid JSON");
    if (!cJSON_IsObject(root)) {
        cJSON_Delete(root);
        return mb_err_set(err, MB_EFORMAT, "not a JSON object");
    }
    int have_format = 0, format_ok = 0, have_version = 0;
    double version = 0;
    for (const cJSON *c = root->child; c; c = c->next) {
        const char *key = c->string;
        if (!key || strlen(key) >= 32)
            continue;
        if (!strcmp(key, "reasons") || !strcmp(key, "gauges")) {
            if (!cJSON_IsArray(c))
                continue;
            int reasons = key[0] == 'r';
            if (reasons)
                r->n_reasons = 0;
            else
                r->n_gauges = 0;
            for (const cJSON *e = c->child; e; e = e->next) {
                if (!cJSON_IsObject(e))
                    continue;
                if (reasons && r->n_reasons < MB_SLOG_MAX_REASONS) {
                    mb_slog_reason *x = &r->reasons[r->n_reasons++];
                    reset_reason(x);
                    cj_object(e, x, reason_fields, N_REASON_F);
                } else if (!reasons && r->n_gauges < MB_SLOG_MAX_GAUGES) {
                    mb_slog_gauge *g = &r->gauges[r->n_gauges++];
                    reset_gauge(g);
                    cj_object(e, g, gauge_fields, N_GAUGE_F);
                }
            }
        } else if (!strcmp(key, "modes")) {
            if (!cJSON_IsArray(c))
                continue;
            r->n_modes = 0;
            for (const cJSON *e = c->child; e && r->n_modes < MB_SLOG_MAX_MODES;
                 e = e->next)
                r->modes[r->n_modes++] = cJSON_IsNumber(e) ? e->valuedouble : NAN;
        } else if (!strcmp(key, "pose")) {
            if (cJSON_IsNull(c)) {
                r->has_pose = 0;
            } else if (cJSON_IsObject(c)) {
                static const field pose_fields[] = {
                    RK("x", pose_x, F_NUM), RK("y", pose_y, F_NUM),
                    RK("angle", pose_angle, F_NUM),
                    RK("scale", pose_scale, F_NUM)};
                r->has_pose = 1;
                r->pose_x = r->pose_y = r->pose_angle = r->pose_scale = NAN;
                cj_object(c, r, pose_fields, 4);
            }
        } else if (!strcmp(key, "format")) {
            have_format = 1;
            format_ok = cJSON_IsString(c) &&
                        !strcmp(c->valuestring, MB_SHIFTLOG_FORMAT);
        } else if (!strcmp(key, "version")) {
            have_version = cJSON_IsNumber(c);
            version = c->valuedouble;
        } else {
            const field *f = find_field(top_fields, N_TOP, key);
            if (f)
                cj_set(c, r, f);
        }
    }
    cJSON_Delete(root);
    return finish(r, have_format, format_ok, have_version, version, err);
}

int mb_slog_parse_line(const char *line, size_t len, mb_slog_parser parser,
                       mb_slog_record *rec, char *err)
{
    if (!line || !rec)
        return mb_err_set(err, MB_EINVAL, "no line or no record");
    reset_record(rec);
    return parser == MB_SLOG_PARSER_CJSON ? parse_cjson(line, len, rec, err)
                                          : parse_scan(line, len, rec, err);
}

/* ---- the file --------------------------------------------------------- */

#define READ_BUF (1024 * 1024)

static int blank(const char *p, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (p[i] != ' ' && p[i] != '\t' && p[i] != '\r')
            return 0;
    return 1;
}

int mb_slog_read_file(const char *path, mb_slog_parser parser, mb_slog_fn fn,
                      void *user, mb_slog_stats *stats, char *err)
{
    mb_slog_stats local;
    if (!stats)
        stats = &local;
    memset(stats, 0, sizeof *stats);
    if (!path || !fn)
        return mb_err_set(err, MB_EINVAL, "no path or no callback");
    FILE *f = fopen(path, "rb");
    if (!f)
        return mb_err_set(err, errno == ENOENT ? MB_ENOTFOUND : MB_EIO,
                          "%s: cannot open: %s", path, strerror(errno));
    char *buf = malloc(READ_BUF);
    mb_slog_record *rec = malloc(sizeof *rec);
    int rc = 0;
    if (!buf || !rec) {
        rc = mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
        goto out;
    }
    size_t have = 0;   /* bytes of an unfinished line at buf[0] */
    int skipping = 0;  /* inside an over-long line */
    for (;;) {
        size_t got = fread(buf + have, 1, READ_BUF - have, f);
        if (got == 0) {
            if (ferror(f)) {
                rc = mb_err_set(err, MB_EIO, "%s: read error", path);
                goto out;
            }
            break;
        }
        size_t end = have + got, pos = 0;
        for (;;) {
            char *nl = memchr(buf + pos, '\n', end - pos);
            if (!nl)
                break;
            size_t n = (size_t)(nl - (buf + pos));
            stats->lines++;
            if (skipping) {
                skipping = 0; /* counted when it began */
            } else if (n > MB_SLOG_MAX_LINE) {
                stats->invalid++;
                if (!stats->first_invalid)
                    stats->first_invalid = stats->lines;
            } else if (blank(buf + pos, n)) {
                stats->blank++;
            } else {
                int r = mb_slog_parse_line(buf + pos, n, parser, rec, NULL);
                if (r == MB_EVERSION) {
                    stats->newer++;
                    if (rec->version > stats->newest_version)
                        stats->newest_version = rec->version;
                } else if (r) {
                    stats->invalid++;
                    if (!stats->first_invalid)
                        stats->first_invalid = stats->lines;
                } else {
                    stats->records++;
                    int s = fn(rec, user);
                    if (s) {
                        rc = s;
                        goto out;
                    }
                }
            }
            pos = (size_t)(nl - buf) + 1;
        }
        have = end - pos;
        if (have > MB_SLOG_MAX_LINE) {
            /* no newline within the longest line: drop it, count it once */
            if (!skipping) {
                stats->invalid++;
                if (!stats->first_invalid)
                    stats->first_invalid = stats->lines + 1;
                skipping = 1;
            }
            have = 0;
        } else if (pos > 0 && have > 0) {
            memmove(buf, buf + pos, have);
        }
    }
    if (have > 0 && !skipping && !blank(buf, have)) {
        stats->lines++;
        stats->torn++;
    }
out:
    free(rec);
    free(buf);
    fclose(f);
    return rc;
}
