/* io/svg.c - SVG markup into a growing buffer, for HTML reports. */
#include "svg.h"

#include "error.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct mb_svg {
    char *buf;
    size_t len, cap;
    int failed;
    int finished;
};

static void vappend(mb_svg *s, const char *fmt, va_list ap)
{
    if (!s || s->failed)
        return;
    for (;;) {
        va_list cp;
        va_copy(cp, ap);
        int n = vsnprintf(s->buf + s->len, s->cap - s->len, fmt, cp);
        va_end(cp);
        if (n < 0) {
            s->failed = 1;
            return;
        }
        if ((size_t)n < s->cap - s->len) {
            s->len += (size_t)n;
            return;
        }
        size_t ncap = s->cap * 2 + (size_t)n + 1;
        char *nb = realloc(s->buf, ncap);
        if (!nb) {
            s->failed = 1;
            return;
        }
        s->buf = nb;
        s->cap = ncap;
    }
}

static void append(mb_svg *s, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;
static void append(mb_svg *s, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vappend(s, fmt, ap);
    va_end(ap);
}

static void append_escaped(mb_svg *s, const char *t)
{
    for (; t && *t; t++) {
        switch (*t) {
        case '&': append(s, "&amp;"); break;
        case '<': append(s, "&lt;"); break;
        case '>': append(s, "&gt;"); break;
        case '"': append(s, "&quot;"); break;
        case '\'': append(s, "&#39;"); break;
        default: append(s, "%c", *t); break;
        }
    }
}

int mb_svg_open(double width, double height, mb_svg **out)
{
    if (!out)
        return MB_EINVAL;
    *out = NULL;
    mb_svg *s = calloc(1, sizeof *s);
    if (!s)
        return MB_ENOMEM;
    s->cap = 4096;
    s->buf = malloc(s->cap);
    if (!s->buf) {
        free(s);
        return MB_ENOMEM;
    }
    s->buf[0] = '\0';
    append(s,
           "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%.0f\" "
           "height=\"%.0f\" viewBox=\"0 0 %.0f %.0f\" "
           "font-family=\"sans-serif\">\n",
           width, height, width, height);
    *out = s;
    return MB_OK;
}

void mb_svg_close(mb_svg *s)
{
    if (!s)
        return;
    free(s->buf);
    free(s);
}

void mb_svg_raw(mb_svg *s, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vappend(s, fmt, ap);
    va_end(ap);
}

static void stroke_attrs(mb_svg *s, const char *stroke, double width,
                         const char *fill, const char *dash)
{
    append(s, " stroke=\"%s\" stroke-width=\"%.2f\" fill=\"%s\"",
           stroke ? stroke : "none", width, fill ? fill : "none");
    if (dash)
        append(s, " stroke-dasharray=\"%s\"", dash);
}

void mb_svg_polyline(mb_svg *s, const double *xy, int n, int closed,
                     const char *stroke, double width, const char *fill,
                     const char *dash)
{
    if (n < 2)
        return;
    append(s, "<%s points=\"", closed ? "polygon" : "polyline");
    for (int i = 0; i < n; i++)
        append(s, "%s%.2f,%.2f", i ? " " : "", xy[2 * i], xy[2 * i + 1]);
    append(s, "\"");
    stroke_attrs(s, stroke, width, fill, dash);
    append(s, "/>\n");
}

void mb_svg_line(mb_svg *s, double x0, double y0, double x1, double y1,
                 const char *stroke, double width, const char *dash)
{
    append(s, "<line x1=\"%.2f\" y1=\"%.2f\" x2=\"%.2f\" y2=\"%.2f\"", x0, y0,
           x1, y1);
    stroke_attrs(s, stroke, width, NULL, dash);
    append(s, "/>\n");
}

void mb_svg_rect(mb_svg *s, double x, double y, double w, double h,
                 const char *fill, const char *stroke)
{
    append(s,
           "<rect x=\"%.2f\" y=\"%.2f\" width=\"%.2f\" height=\"%.2f\" "
           "fill=\"%s\" stroke=\"%s\"/>\n",
           x, y, w, h, fill ? fill : "none", stroke ? stroke : "none");
}

void mb_svg_circle(mb_svg *s, double cx, double cy, double r,
                   const char *fill, const char *stroke)
{
    append(s, "<circle cx=\"%.2f\" cy=\"%.2f\" r=\"%.2f\" fill=\"%s\" stroke=\"%s\"/>\n",
           cx, cy, r, fill ? fill : "none", stroke ? stroke : "none");
}

void mb_svg_text(mb_svg *s, double x, double y, double size,
                 const char *anchor, const char *fill, const char *text)
{
    append(s,
           "<text x=\"%.2f\" y=\"%.2f\" font-size=\"%.1f\" text-anchor=\"%s\" "
           "fill=\"%s\">",
           x, y, size, anchor ? anchor : "start", fill ? fill : "#222");
    append_escaped(s, text);
    append(s, "</text>\n");
}

int mb_svg_finish(mb_svg *s, const char **svg)
{
    if (!s || !svg)
        return MB_EINVAL;
    if (!s->finished) {
        append(s, "</svg>\n");
        s->finished = 1;
    }
    if (s->failed)
        return MB_ENOMEM;
    *svg = s->buf;
    return MB_OK;
}

void mb_html_escape(FILE *f, const char *text)
{
    for (; text && *text; text++) {
        switch (*text) {
        case '&': fputs("&amp;", f); break;
        case '<': fputs("&lt;", f); break;
        case '>': fputs("&gt;", f); break;
        case '"': fputs("&quot;", f); break;
        case '\'': fputs("&#39;", f); break;
        default: fputc(*text, f); break;
        }
    }
}
