/*
 * io/svg.h - a small builder for self-contained SVG charts inside HTML
 * reports (no scripts, no external resources). Text is escaped for XML.
 *
 * The builder writes into a growing buffer owned by the handle; every call
 * after an allocation failure is a no-op and mb_svg_finish reports it.
 */
#ifndef MB_SVG_H
#define MB_SVG_H

#include <stddef.h>
#include <stdio.h>

typedef struct mb_svg mb_svg;

/** Start a drawing of width x height user units (px on screen). */
int mb_svg_open(double width, double height, mb_svg **out);
/** Free. NULL-safe. */
void mb_svg_close(mb_svg *s);

/** Append raw, already valid SVG markup. */
void mb_svg_raw(mb_svg *s, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;
/** A polyline (closed -> polygon) through n points xy (interleaved). */
void mb_svg_polyline(mb_svg *s, const double *xy, int n, int closed,
                     const char *stroke, double width, const char *fill,
                     const char *dash);
void mb_svg_line(mb_svg *s, double x0, double y0, double x1, double y1,
                 const char *stroke, double width, const char *dash);
void mb_svg_rect(mb_svg *s, double x, double y, double w, double h,
                 const char *fill, const char *stroke);
void mb_svg_circle(mb_svg *s, double cx, double cy, double r,
                   const char *fill, const char *stroke);
/** Text; anchor is "start", "middle" or "end". The text is escaped. */
void mb_svg_text(mb_svg *s, double x, double y, double size,
                 const char *anchor, const char *fill, const char *text);

/**
 * Finish the drawing: on success *svg points at the NUL-terminated markup,
 * owned by the handle (valid until mb_svg_close).
 * Return value: 0 or MB_ENOMEM.
 */
int mb_svg_finish(mb_svg *s, const char **svg);

/** Write text to f escaped for XML/HTML (&, <, >, ", '). */
void mb_html_escape(FILE *f, const char *text);

#endif
