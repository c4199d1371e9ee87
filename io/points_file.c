/*
 * io/points_file.c - landmark point files, JSON and CSV (layouts in
 * points_file.h).
 *
 * Both readers give the same result for the same points: a layout (points
 * per outline, outer edge first) and one interleaved x, y array. Doubles are
 * written with mb_json_format_double, so a save/load round trip is exact.
 */
#include "points_file.h"

#include "error.h"
#include "file_util.h"
#include "json_util.h"

#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#define POINTS_FORMAT "modeband-points"
#define POINTS_VERSION 1
/* Largest point file read: the most points a layout allows (64 x 8192) at
   a generous 500 bytes each. */
#define POINTS_MAX_BYTES ((size_t)256 << 20)

/* ---- JSON ---- */

static int json_outline_sizes(const cJSON *outlines, const char *name,
                              mb_layout *l, char *err)
{
    char field[MB_JSON_FIELD_LEN];
    const cJSON *ol;
    int n = cJSON_GetArraySize(outlines);
    if (n < 1 || n > MB_MAX_OUTLINES)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: outlines: expected 1 to %d outlines, found %d",
                          name, MB_MAX_OUTLINES, n);
    l->n_outlines = n;
    int i = 0;
    cJSON_ArrayForEach(ol, outlines)
    {
        snprintf(field, sizeof field, "outlines[%d]", i);
        if (!cJSON_IsArray(ol))
            return mb_json_expected(err, MB_EFORMAT, name, field, ol,
                                    "an array of points [x, y]");
        int c = cJSON_GetArraySize(ol);
        if (c < 3 || c > MB_MAX_OUTLINE_POINTS)
            return mb_err_set(err, MB_EFORMAT,
                              "%s: outlines[%d]: expected 3 to %d points, "
                              "found %d",
                              name, i, MB_MAX_OUTLINE_POINTS, c);
        l->counts[i++] = c;
        l->n_points += c;
    }
    return MB_OK;
}

static int json_points(const char *text, size_t len, const char *name,
                       mb_layout *l, double **xy, char *err)
{
    cJSON *root = NULL;
    const cJSON *outlines, *ol, *pt;
    char field[MB_JSON_FIELD_LEN];
    double *v = NULL;
    int rc = mb_json_parse(text, len, name, &root, err);
    if (rc < 0)
        return rc;
    if ((rc = mb_json_check_header(root, name, POINTS_FORMAT, POINTS_VERSION,
                                   err)) < 0 ||
        (rc = mb_json_member(root, name, "", "outlines", MB_JSON_ARRAY,
                             &outlines, err)) < 0 ||
        (rc = json_outline_sizes(outlines, name, l, err)) < 0)
        goto done;
    if (!(v = malloc(2 * (size_t)l->n_points * sizeof *v))) {
        rc = mb_err_set(err, MB_ENOMEM, "%s: out of memory for %d points", name,
                        l->n_points);
        goto done;
    }
    int i = 0;
    size_t at = 0;
    cJSON_ArrayForEach(ol, outlines)
    {
        int j = 0;
        cJSON_ArrayForEach(pt, ol)
        {
            snprintf(field, sizeof field, "outlines[%d][%d]", i, j);
            if (!cJSON_IsArray(pt) || cJSON_GetArraySize(pt) != 2) {
                rc = mb_json_expected(err, MB_EFORMAT, name, field, pt,
                                      "a point [x, y]");
                goto done;
            }
            if ((rc = mb_json_numbers(pt, name, field, 2, v + at, err)) < 0)
                goto done;
            at += 2;
            j++;
        }
        i++;
    }
done:
    cJSON_Delete(root);
    if (rc < 0) {
        free(v);
        v = NULL;
    }
    *xy = v;
    return rc;
}

/* ---- CSV ---- */

typedef struct {
    const char *s;
    size_t n;
} span;

static int is_blank(char c)
{
    return c == ' ' || c == '\t' || c == '\r';
}

static span trim(span f)
{
    while (f.n && is_blank(f.s[0])) {
        f.s++;
        f.n--;
    }
    while (f.n && is_blank(f.s[f.n - 1]))
        f.n--;
    return f;
}

static int span_is(span f, const char *word)
{
    return f.n == strlen(word) && strncasecmp(f.s, word, f.n) == 0;
}

/* Up to 24 printable bytes of f, for quoting in a sentence. */
static void quote(span f, char *q, size_t size)
{
    size_t n = 0;
    for (; n < f.n && n < 24 && n + 4 < size; n++)
        q[n] = f.s[n] >= 0x20 && f.s[n] < 0x7f ? f.s[n] : '?';
    if (n < f.n && n + 4 < size) {
        memcpy(q + n, "...", 3);
        n += 3;
    }
    q[n] = '\0';
}

/* Decimal syntax only: [+-] digits [. digits] [e [+-] digits], at least
   one mantissa digit. strtod alone would also take hex, "nan", "inf". */
static int decimal_syntax(const char *p)
{
    int digits = 0;
    if (*p == '+' || *p == '-')
        p++;
    for (; *p >= '0' && *p <= '9'; p++)
        digits++;
    if (*p == '.')
        for (p++; *p >= '0' && *p <= '9'; p++)
            digits++;
    if (!digits)
        return 0;
    if (*p == 'e' || *p == 'E') {
        p++;
        if (*p == '+' || *p == '-')
            p++;
        if (!(*p >= '0' && *p <= '9'))
            return 0;
        while (*p >= '0' && *p <= '9')
            p++;
    }
    return *p == '\0';
}

static int csv_number(span f, const char *name, int line, const char *what,
                      double *out, char *err)
{
    char buf[64], q[32];
    quote(f, q, sizeof q);
    if (f.n == 0)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: line %d: %s: expected a number, found nothing",
                          name, line, what);
    if (f.n >= sizeof buf)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: line %d: %s: expected a number, found '%s' "
                          "(too long)",
                          name, line, what, q);
    memcpy(buf, f.s, f.n);
    buf[f.n] = '\0';
    const char *p = buf + (buf[0] == '+' || buf[0] == '-');
    if (!strcasecmp(p, "nan") || !strcasecmp(p, "inf") ||
        !strcasecmp(p, "infinity"))
        return mb_err_set(err, MB_ENUMERIC,
                          "%s: line %d: %s: expected a finite number, found "
                          "'%s'",
                          name, line, what, q);
    if (!decimal_syntax(buf))
        return mb_err_set(err, MB_EFORMAT,
                          "%s: line %d: %s: expected a decimal number, found "
                          "'%s'",
                          name, line, what, q);
    double v = strtod(buf, NULL);
    if (!isfinite(v))
        return mb_err_set(err, MB_ENUMERIC,
                          "%s: line %d: %s: expected a finite number, found "
                          "'%s', which is out of range",
                          name, line, what, q);
    *out = v;
    return MB_OK;
}

static int csv_outline(span f, const char *name, int line, int *out, char *err)
{
    char q[32];
    int v = 0;
    size_t i = f.s && f.n && f.s[0] == '+' ? 1 : 0;
    int ok = f.n > i;
    for (; ok && i < f.n; i++) {
        ok = f.s[i] >= '0' && f.s[i] <= '9';
        if (ok && (v = v * 10 + (f.s[i] - '0')) >= MB_MAX_OUTLINES)
            ok = 0;
    }
    if (!ok) {
        quote(f, q, sizeof q);
        return mb_err_set(err, MB_EFORMAT,
                          "%s: line %d: outline: expected an integer from 0 "
                          "to %d, found '%s'",
                          name, line, MB_MAX_OUTLINES - 1, q);
    }
    *out = v;
    return MB_OK;
}

/* Split a line into exactly 3 comma-separated, trimmed fields. */
static int csv_fields(span ln, const char *name, int line, span f[3], char *err)
{
    int n = 0;
    size_t start = 0;
    for (size_t i = 0; i <= ln.n; i++) {
        if (i < ln.n && ln.s[i] != ',')
            continue;
        if (n < 3)
            f[n] = trim((span){ln.s + start, i - start});
        n++;
        start = i + 1;
    }
    if (n != 3)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: line %d: expected 3 fields \"outline,x,y\", "
                          "found %d",
                          name, line, n);
    return MB_OK;
}

static int short_outline(const mb_layout *l, int o, const char *name, int line,
                         char *err)
{
    return mb_err_set(err, MB_EFORMAT,
                      "%s: line %d: outline %d has %d point%s; expected at "
                      "least 3",
                      name, line, o, l->counts[o],
                      l->counts[o] == 1 ? "" : "s");
}

static int csv_points(const char *text, size_t len, const char *name,
                      mb_layout *l, double **xy, char *err)
{
    double *v = NULL;
    size_t cap = 0, pos = 0;
    int line = 0, last_line = 0, cur = -1, header_ok = 1, rc = MB_OK;
    span f[3];
    while (pos < len) {
        const char *s = text + pos;
        const char *nl = memchr(s, '\n', len - pos);
        span ln = {s, nl ? (size_t)(nl - s) : len - pos};
        pos += ln.n + (nl ? 1 : 0);
        line++;
        ln = trim(ln);
        if (ln.n == 0 || ln.s[0] == '#')
            continue;
        if (memchr(ln.s, '\0', ln.n)) {
            rc = mb_err_set(err, MB_EFORMAT,
                            "%s: line %d: unexpected NUL byte; expected text "
                            "lines \"outline,x,y\"",
                            name, line);
            goto fail;
        }
        if ((rc = csv_fields(ln, name, line, f, err)) < 0)
            goto fail;
        if (header_ok && span_is(f[0], "outline") && span_is(f[1], "x") &&
            span_is(f[2], "y")) {
            header_ok = 0;
            continue;
        }
        header_ok = 0;
        int o = 0;
        double x = 0.0, y = 0.0;
        if ((rc = csv_outline(f[0], name, line, &o, err)) < 0)
            goto fail;
        if (cur < 0 && o != 0) {
            rc = mb_err_set(err, MB_EFORMAT,
                            "%s: line %d: outline: expected 0 (the outer edge "
                            "comes first), found %d",
                            name, line, o);
            goto fail;
        }
        if (o < cur || o > cur + 1) {
            rc = mb_err_set(err, MB_EFORMAT,
                            "%s: line %d: outline: expected %d or %d after "
                            "outline %d (numbered in order, without gaps), "
                            "found %d",
                            name, line, cur, cur + 1, cur, o);
            goto fail;
        }
        if (o == cur + 1) {
            if (cur >= 0 && l->counts[cur] < 3) {
                rc = short_outline(l, cur, name, last_line, err);
                goto fail;
            }
            cur = o;
            l->n_outlines = o + 1;
        }
        if (l->counts[cur] == MB_MAX_OUTLINE_POINTS) {
            rc = mb_err_set(err, MB_EFORMAT,
                            "%s: line %d: outline %d has more than %d points; "
                            "expected at most %d",
                            name, line, cur, MB_MAX_OUTLINE_POINTS,
                            MB_MAX_OUTLINE_POINTS);
            goto fail;
        }
        if ((rc = csv_number(f[1], name, line, "x", &x, err)) < 0 ||
            (rc = csv_number(f[2], name, line, "y", &y, err)) < 0)
            goto fail;
        if ((size_t)l->n_points == cap) {
            size_t ncap = cap ? 2 * cap : 256;
            double *nv = realloc(v, 2 * ncap * sizeof *v);
            if (!nv) {
                rc = mb_err_set(err, MB_ENOMEM,
                                "%s: out of memory for %zu points", name, ncap);
                goto fail;
            }
            v = nv;
            cap = ncap;
        }
        v[2 * l->n_points] = x;
        v[2 * l->n_points + 1] = y;
        l->n_points++;
        l->counts[cur]++;
        last_line = line;
    }
    if (cur < 0) {
        rc = mb_err_set(err, MB_EFORMAT,
                        "%s: no points found; expected lines \"outline,x,y\"",
                        name);
        goto fail;
    }
    if (l->counts[cur] < 3) {
        rc = short_outline(l, cur, name, last_line, err);
        goto fail;
    }
    *xy = v;
    return MB_OK;
fail:
    free(v);
    return rc;
}

/* ---- public ---- */

int mb_points_parse(const char *text, size_t len, int is_csv, const char *name,
                    mb_layout *layout, double **xy, char *err)
{
    if (!layout || !xy || (!text && len))
        return mb_err_set(err, MB_EINVAL, "points parse: no text or output");
    memset(layout, 0, sizeof *layout);
    *xy = NULL;
    if (!name)
        name = "points";
    int rc = is_csv ? csv_points(text, len, name, layout, xy, err)
                    : json_points(text ? text : "", len, name, layout, xy, err);
    if (rc < 0) {
        memset(layout, 0, sizeof *layout);
        *xy = NULL;
    }
    return rc;
}

static int has_suffix(const char *s, const char *suffix)
{
    size_t n = strlen(s), m = strlen(suffix);
    return n > m && strcasecmp(s + n - m, suffix) == 0;
}

int mb_points_load(const char *path, mb_layout *layout, double **xy, char *err)
{
    if (!path || !layout || !xy)
        return mb_err_set(err, MB_EINVAL,
                          "points load: no file name or output");
    memset(layout, 0, sizeof *layout);
    *xy = NULL;
    int is_csv = has_suffix(path, ".csv");
    if (!is_csv && !has_suffix(path, ".json"))
        return mb_err_set(err, MB_EFORMAT,
                          "%s: expected a point file named *.json or *.csv",
                          path);
    char *text;
    size_t len;
    int rc = mb_file_read_all(path, POINTS_MAX_BYTES, &text, &len, err);
    if (rc < 0)
        return rc;
    rc = mb_points_parse(text, len, is_csv, path, layout, xy, err);
    free(text);
    return rc;
}

/* One outline as compact JSON "[[x,y],...]" (numbers exact); NULL when
   out of memory. Free with cJSON_free. */
static char *outline_text(const double *xy, int n)
{
    cJSON *a = cJSON_CreateArray();
    int ok = a != NULL;
    for (int j = 0; ok && j < n; j++) {
        cJSON *pt = cJSON_CreateArray();
        cJSON *x = mb_json_raw_number(xy[2 * j]);
        cJSON *y = mb_json_raw_number(xy[2 * j + 1]);
        ok = pt && x && y && cJSON_AddItemToArray(pt, x);
        if (ok)
            x = NULL;
        ok = ok && cJSON_AddItemToArray(pt, y);
        if (ok)
            y = NULL;
        ok = ok && cJSON_AddItemToArray(a, pt);
        if (ok)
            pt = NULL;
        cJSON_Delete(pt);
        cJSON_Delete(x);
        cJSON_Delete(y);
    }
    char *s = ok ? cJSON_PrintUnformatted(a) : NULL;
    cJSON_Delete(a);
    return s;
}

int mb_points_save(const char *path, const mb_layout *layout, const double *xy,
                   char *err)
{
    if (!path || !layout || !xy)
        return mb_err_set(err, MB_EINVAL, "points save: no file name or data");
    if (mb_layout_check(layout) < 0)
        return mb_err_set(err, MB_EINVAL,
                          "%s: cannot save: invalid outline layout", path);
    for (int i = 0; i < 2 * layout->n_points; i++)
        if (!isfinite(xy[i]))
            return mb_err_set(err, MB_EINVAL,
                              "%s: cannot save: point %d has a non-finite "
                              "coordinate",
                              path, i / 2);
    /* One outline per line: readable, and diff-friendly. */
    char *parts[MB_MAX_OUTLINES] = {NULL};
    char head[96];
    const char *tail = "\n ]}\n";
    int nh = snprintf(head, sizeof head,
                      "{\"format\": \"%s\", \"version\": %d,\n \"outlines\": [",
                      POINTS_FORMAT, POINTS_VERSION);
    size_t total = (size_t)nh + strlen(tail);
    int rc = MB_OK;
    for (int o = 0, first = 0; o < layout->n_outlines; o++) {
        if (!(parts[o] =
                  outline_text(xy + 2 * (size_t)first, layout->counts[o]))) {
            rc = mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
            goto done;
        }
        total += strlen(parts[o]) + 4; /* "\n  " and "," */
        first += layout->counts[o];
    }
    char *text = malloc(total + 1), *at = text;
    if (!text) {
        rc = mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
        goto done;
    }
    at += sprintf(at, "%s", head);
    for (int o = 0; o < layout->n_outlines; o++)
        at += sprintf(at, "%s\n  %s", o ? "," : "", parts[o]);
    at += sprintf(at, "%s", tail);
    rc = mb_file_write_atomic(path, text, (size_t)(at - text), err);
    free(text);
done:
    for (int o = 0; o < layout->n_outlines; o++)
        cJSON_free(parts[o]);
    return rc;
}
