/*
 * calibration/target.c - the target's geometry, pitch code and printable
 * SVG sheet (layout in target.h). The SVG is built here as plain text so
 * that the sheet's true scale (width/height in mm, viewBox in mm) does not
 * depend on a drawing library's idea of units.
 */
#include "target.h"

#include "error.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int check_sides(int rows, int cols, char *err)
{
    if (rows < MB_TARGET_MIN_SIDE || rows > MB_TARGET_MAX_SIDE)
        return mb_err_set(err, MB_ERANGE,
                          "target: rows: expected %d to %d, found %d",
                          MB_TARGET_MIN_SIDE, MB_TARGET_MAX_SIDE, rows);
    if (cols < MB_TARGET_MIN_SIDE || cols > MB_TARGET_MAX_SIDE)
        return mb_err_set(err, MB_ERANGE,
                          "target: cols: expected %d to %d, found %d",
                          MB_TARGET_MIN_SIDE, MB_TARGET_MAX_SIDE, cols);
    return MB_OK;
}

static int check_pitch_range(double pitch, char *err)
{
    /* The code holds round(pitch / 0.1) in 10 bits: 1.0 .. 102.3 mm. */
    if (!(pitch >= MB_TARGET_MIN_PITCH - 1e-9 &&
          pitch <= MB_TARGET_MAX_PITCH + 1e-9))
        return mb_err_set(err, MB_ERANGE,
                          "target: pitch: expected %.1f to %.1f mm, found %g",
                          MB_TARGET_MIN_PITCH, MB_TARGET_MAX_PITCH, pitch);
    return MB_OK;
}

static void fill(int rows, int cols, double pitch, mb_target *t)
{
    t->rows = rows;
    t->cols = cols;
    t->pitch = pitch;
    t->dot_diameter = 0.5 * pitch;
    t->mark_diameter = 0.25 * pitch;
    t->code = mb_target_code_of_pitch(pitch);
}

int mb_target_init(int rows, int cols, double pitch, mb_target *t, char *err)
{
    int rc;
    if (!t)
        return mb_err_set(err, MB_EINVAL, "target: no target to fill");
    if ((rc = check_sides(rows, cols, err)) < 0 ||
        (rc = check_pitch_range(pitch, err)) < 0)
        return rc;
    double tenths = pitch * 10.0;
    if (fabs(tenths - floor(tenths + 0.5)) > 1e-6)
        return mb_err_set(err, MB_ERANGE,
                          "target: pitch: expected a multiple of 0.1 mm (the "
                          "target prints its pitch in tenths of a mm), found "
                          "%.17g",
                          pitch);
    fill(rows, cols, floor(tenths + 0.5) / 10.0, t);
    return MB_OK;
}

int mb_target_init_measured(int rows, int cols, double pitch, mb_target *t,
                            char *err)
{
    int rc;
    if (!t)
        return mb_err_set(err, MB_EINVAL, "target: no target to fill");
    if ((rc = check_sides(rows, cols, err)) < 0 ||
        (rc = check_pitch_range(pitch, err)) < 0)
        return rc;
    fill(rows, cols, pitch, t);
    return MB_OK;
}

int mb_target_code_of_pitch(double pitch)
{
    if (!(pitch >= MB_TARGET_MIN_PITCH - 1e-9 &&
          pitch <= MB_TARGET_MAX_PITCH + 1e-9))
        return -1;
    int v = (int)floor(pitch * 10.0 + 0.5);
    if (v < 1 || v > 1023)
        return -1;
    return v | ((v % 3) << 10);
}

double mb_target_pitch_of_code(int code)
{
    if (code < 0 || code >= (1 << MB_TARGET_CODE_BITS))
        return -1.0;
    int v = code & 1023, check = code >> 10;
    if (v == 0 || check != v % 3)
        return -1.0;
    return v / 10.0;
}

static int is_corner_cell(const mb_target *t, int r, int c)
{
    return (r == 0 || r == t->rows - 2) && (c == 0 || c == t->cols - 2);
}

int mb_target_cell_bit(const mb_target *t, int r, int c)
{
    if (!t || r < 0 || c < 0 || r > t->rows - 2 || c > t->cols - 2)
        return -2;
    if (is_corner_cell(t, r, c))
        return -1;
    /* Raster index of the cell, less the corner cells before it: one
       corner cell (0, 0) precedes every cell after it, (0, C-2) precedes
       every cell of rows >= 1, (R-2, 0) precedes the cells of row R-2
       after column 0. */
    int idx = r * (t->cols - 1) + c;
    int before = 1;
    if (r >= 1)
        before++;
    if (r == t->rows - 2)
        before++;
    idx -= before;
    return idx < MB_TARGET_CODE_BITS ? idx : -1;
}

int mb_target_cell_marked(const mb_target *t, int r, int c)
{
    if (!t || r < 0 || c < 0 || r > t->rows - 2 || c > t->cols - 2)
        return 0;
    if (is_corner_cell(t, r, c))
        return !(r == t->rows - 2 && c == t->cols - 2);
    int bit = mb_target_cell_bit(t, r, c);
    return bit >= 0 && ((t->code >> bit) & 1);
}

/* ---- SVG text ---- */

typedef struct {
    char *buf;
    size_t len, cap;
    int failed;
} text_buf;

static void put(text_buf *b, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;

static void put(text_buf *b, const char *fmt, ...)
{
    if (b->failed)
        return;
    for (;;) {
        va_list ap;
        va_start(ap, fmt);
        int n = vsnprintf(b->buf + b->len, b->cap - b->len, fmt, ap);
        va_end(ap);
        if (n < 0) {
            b->failed = 1;
            return;
        }
        if ((size_t)n < b->cap - b->len) {
            b->len += (size_t)n;
            return;
        }
        size_t cap = 2 * b->cap + (size_t)n + 1;
        char *nb = realloc(b->buf, cap);
        if (!nb) {
            b->failed = 1;
            return;
        }
        b->buf = nb;
        b->cap = cap;
    }
}

int mb_target_svg(const mb_target *t, char **svg, size_t *len, char *err)
{
    if (!t || !svg || !len)
        return mb_err_set(err, MB_EINVAL, "target sheet: no target or output");
    *svg = NULL;
    *len = 0;
    int rc = check_sides(t->rows, t->cols, err);
    if (rc < 0)
        return rc;
    if ((rc = check_pitch_range(t->pitch, err)) < 0)
        return rc;
    const double p = t->pitch;
    /* Quiet zone of 1.5 pitch around the outer dot centres, at least
       10 mm of paper; the text block starts 2 pitch below the last row. */
    const double margin = fmax(1.5 * p, 10.0);
    const double grid_w = (t->cols - 1) * p, grid_h = (t->rows - 1) * p;
    /* Text lines hold at most about 64 characters of about 0.55 font
       size each; the sheet is widened for them when the grid is small. */
    const double font = grid_w >= 120.0 ? 3.0 : 2.5;
    const double line = 1.5 * font;
    const double text_w = 64 * 0.55 * font;
    const double text_top = margin + grid_h + fmax(2.0 * p, 0.5 * margin + p);
    const double width = fmax(grid_w + 2 * margin, text_w + 2 * 10.0);
    const double bar_y = text_top + 7 * line;
    const double height = bar_y + 3 * line + 10.0;
    const double x0 = margin, y0 = margin;
    text_buf b = {malloc(8192), 0, 8192, 0};
    if (!b.buf)
        return mb_err_set(err, MB_ENOMEM, "target sheet: out of memory");
    b.buf[0] = '\0';

    put(&b,
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%.3fmm\" "
        "height=\"%.3fmm\" viewBox=\"0 0 %.3f %.3f\" "
        "font-family=\"sans-serif\">\n",
        width, height, width, height);
    put(&b,
        "<title>modeband calibration target %d x %d, pitch %.1f mm</title>\n"
        "<rect x=\"0\" y=\"0\" width=\"%.3f\" height=\"%.3f\" "
        "fill=\"#ffffff\"/>\n<g fill=\"#000000\">\n",
        t->rows, t->cols, p, width, height);
    for (int r = 0; r < t->rows; r++)
        for (int c = 0; c < t->cols; c++)
            put(&b, "<circle cx=\"%.4f\" cy=\"%.4f\" r=\"%.4f\"/>\n",
                x0 + c * p, y0 + r * p, 0.5 * t->dot_diameter);
    for (int r = 0; r + 1 < t->rows; r++)
        for (int c = 0; c + 1 < t->cols; c++)
            if (mb_target_cell_marked(t, r, c))
                put(&b, "<circle cx=\"%.4f\" cy=\"%.4f\" r=\"%.4f\"/>\n",
                    x0 + (c + 0.5) * p, y0 + (r + 0.5) * p,
                    0.5 * t->mark_diameter);
    put(&b, "</g>\n<g fill=\"#000000\" font-size=\"%.3f\">\n", font);
    /* Seven lines of at most 64 characters (the sheet width allows). */
    double ty = text_top;
    put(&b, "<text x=\"%.3f\" y=\"%.3f\">modeband calibration target</text>\n",
        x0, ty);
    put(&b,
        "<text x=\"%.3f\" y=\"%.3f\">%d rows x %d columns of dots, pitch "
        "%.1f mm, dot diameter %.2f mm</text>\n",
        x0, ty += line, t->rows, t->cols, p, t->dot_diameter);
    put(&b,
        "<text x=\"%.3f\" y=\"%.3f\">Print at 100 %% (no scaling, no fit to "
        "page) on matt paper and</text>\n",
        x0, ty += line);
    put(&b,
        "<text x=\"%.3f\" y=\"%.3f\">keep it flat. Row 1, column 1 is the "
        "top left dot (three marks).</text>\n",
        x0, ty += line);
    put(&b,
        "<text x=\"%.3f\" y=\"%.3f\">Check the print: the bar below must be "
        "%.1f mm long. If the</text>\n",
        x0, ty += line, grid_w);
    put(&b,
        "<text x=\"%.3f\" y=\"%.3f\">pitch you measure differs, give "
        "calibrate the measured pitch.</text>\n",
        x0, ty += line);
    put(&b,
        "<text x=\"%.3f\" y=\"%.3f\">modeband calibrate --pitch %.1f --rows "
        "%d --cols %d --out CAL.json</text>\n",
        x0, ty += line, p, t->rows, t->cols);
    put(&b, "</g>\n");
    /* Scale bar: a thin line of (C-1) pitch with end ticks. Thin and long,
       so the detector never takes it for a dot. */
    put(&b,
        "<g stroke=\"#000000\" stroke-width=\"0.25\" fill=\"none\">\n"
        "<line x1=\"%.4f\" y1=\"%.4f\" x2=\"%.4f\" y2=\"%.4f\"/>\n"
        "<line x1=\"%.4f\" y1=\"%.4f\" x2=\"%.4f\" y2=\"%.4f\"/>\n"
        "<line x1=\"%.4f\" y1=\"%.4f\" x2=\"%.4f\" y2=\"%.4f\"/>\n</g>\n",
        x0, bar_y, x0 + grid_w, bar_y, x0, bar_y - line / 2, x0,
        bar_y + line / 2, x0 + grid_w, bar_y - line / 2, x0 + grid_w,
        bar_y + line / 2);
    put(&b,
        "<text x=\"%.3f\" y=\"%.3f\" font-size=\"%.3f\" "
        "text-anchor=\"middle\">%.1f mm</text>\n</svg>\n",
        x0 + grid_w / 2, bar_y + 1.5 * line, font, grid_w);
    if (b.failed) {
        free(b.buf);
        return mb_err_set(err, MB_ENOMEM, "target sheet: out of memory");
    }
    *svg = b.buf;
    *len = b.len;
    return MB_OK;
}
