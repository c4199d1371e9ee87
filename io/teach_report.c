/*
 * io/teach_report.c - the teach report as one self-contained HTML page with
 * inline SVG (see teach_report.h). Built in memory, written atomically.
 */
#include "teach_report.h"

#include "error.h"
#include "file_util.h"
#include "svg.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define COL_MEAN "#9aa5b1"
#define COL_INK "#25323f"
#define COL_MINUS "#3b6ea5"
#define COL_PLUS "#c2572b"
#define COL_BAD "#b3261e"
#define COL_BAR "#5b7f95"

/* Bounding box of a shape (interleaved, n points). */
static void bbox(const double *xy, int n, double *x0, double *y0, double *x1,
                 double *y1)
{
    *x0 = *y0 = INFINITY;
    *x1 = *y1 = -INFINITY;
    for (int i = 0; i < n; i++) {
        *x0 = fmin(*x0, xy[2 * i]);
        *x1 = fmax(*x1, xy[2 * i]);
        *y0 = fmin(*y0, xy[2 * i + 1]);
        *y1 = fmax(*y1, xy[2 * i + 1]);
    }
}

/* Map a model-frame shape into a box of the SVG: scale s, offset ox, oy. */
typedef struct {
    double s, ox, oy, cx, cy;
} view_map;

static view_map fit_view(const double *xy, int n, double x, double y,
                         double w, double h, double margin)
{
    double x0, y0, x1, y1;
    bbox(xy, n, &x0, &y0, &x1, &y1);
    double sw = (w - 2 * margin) / fmax(x1 - x0, 1e-12);
    double sh = (h - 2 * margin) / fmax(y1 - y0, 1e-12);
    view_map v;
    v.s = fmin(sw, sh);
    v.cx = 0.5 * (x0 + x1);
    v.cy = 0.5 * (y0 + y1);
    v.ox = x + 0.5 * w;
    v.oy = y + 0.5 * h;
    return v;
}

static void draw_shape(mb_svg *s, const mb_layout *l, const double *xy,
                       const view_map *v, const char *stroke, double width,
                       int filled, const char *dash)
{
    double *tmp = malloc((size_t)2 * l->n_points * sizeof *tmp);
    if (!tmp)
        return;
    for (int i = 0; i < l->n_points; i++) {
        tmp[2 * i] = v->ox + v->s * (xy[2 * i] - v->cx);
        tmp[2 * i + 1] = v->oy + v->s * (xy[2 * i + 1] - v->cy);
    }
    int first = 0;
    for (int o = 0; o < l->n_outlines; o++) {
        const char *fill = NULL;
        if (filled)
            fill = o == 0 ? "#e3e8ed" : "#ffffff";
        mb_svg_polyline(s, tmp + 2 * first, l->counts[o], 1, stroke, width,
                        fill, dash);
        first += l->counts[o];
    }
    free(tmp);
}

static int emit_svg(FILE *f, mb_svg *s)
{
    const char *txt = NULL;
    if (mb_svg_finish(s, &txt) < 0)
        return MB_ENOMEM;
    fputs(txt, f);
    return MB_OK;
}

static int picture_mean(FILE *f, const mb_teach_report *r)
{
    const mb_shape_model *m = r->model;
    const mb_layout *l = mb_shape_model_layout(m);
    const double *mean = mb_shape_model_mean(m);
    mb_svg *s = NULL;
    if (mb_svg_open(360, 300, &s) < 0)
        return MB_ENOMEM;
    view_map v = fit_view(mean, l->n_points, 0, 0, 360, 280, 16);
    draw_shape(s, l, mean, &v, COL_INK, 1.5, 1, NULL);
    for (int i = 0; i < l->n_points; i++)
        mb_svg_circle(s, v.ox + v.s * (mean[2 * i] - v.cx),
                      v.oy + v.s * (mean[2 * i + 1] - v.cy), 1.6, COL_INK, NULL);
    char cap[160];
    snprintf(cap, sizeof cap, "mean shape: %d outlines, %d landmarks",
             l->n_outlines, l->n_points);
    mb_svg_text(s, 180, 294, 12, "middle", COL_INK, cap);
    int rc = emit_svg(f, s);
    mb_svg_close(s);
    return rc;
}

static int picture_modes(FILE *f, const mb_teach_report *r)
{
    const mb_shape_model *m = r->model;
    const mb_layout *l = mb_shape_model_layout(m);
    const double *mean = mb_shape_model_mean(m);
    const double *eig = mb_shape_model_eig(m);
    int d = mb_shape_model_dim(m), k = mb_shape_model_n_modes(m);
    int shown = k < 4 ? k : 4;
    const double pw = 200, ph = 170;
    double *x = malloc((size_t)d * sizeof *x);
    mb_svg *s = NULL;
    if (!x || mb_svg_open(3 * pw + 20, shown * (ph + 24) + 10, &s) < 0) {
        free(x);
        return MB_ENOMEM;
    }
    for (int q = 0; q < shown; q++) {
        const double *u = mb_shape_model_modes(m) + (size_t)q * d;
        double sd = sqrt(eig[q]);
        view_map v = fit_view(mean, l->n_points, 0, 0, pw, ph, 14);
        /* largest displacement on screen at 3 sd; magnify small ones so
           the shape change is visible, and say so. */
        double umax = 0.0;
        for (int i = 0; i < l->n_points; i++)
            umax = fmax(umax, hypot(u[2 * i], u[2 * i + 1]));
        double on_screen = 3.0 * sd * umax * v.s;
        double mag = on_screen < 10.0 && on_screen > 0 ? floor(10.0 / on_screen) : 1.0;
        double y0 = 10 + q * (ph + 24);
        for (int c = 0; c < 3; c++) {
            double b = (c - 1) * 3.0 * sd * mag;
            for (int i = 0; i < d; i++)
                x[i] = mean[i] + b * u[i];
            view_map vc = v;
            vc.ox = c * pw + 10 + 0.5 * pw;
            vc.oy = y0 + 0.5 * ph;
            if (c != 1)
                draw_shape(s, l, mean, &vc, COL_MEAN, 1.0, 0, "3,3");
            draw_shape(s, l, x, &vc,
                       c == 0 ? COL_MINUS : (c == 2 ? COL_PLUS : COL_INK), 1.6,
                       0, NULL);
            char cap[120];
            snprintf(cap, sizeof cap, "mode %d at %s", q + 1,
                     c == 0 ? "-3 sd" : (c == 1 ? "0 (mean)" : "+3 sd"));
            mb_svg_text(s, c * pw + 10 + 0.5 * pw, y0 + ph + 12, 11, "middle",
                        COL_INK, cap);
        }
        if (mag > 1.0) {
            char note[80];
            snprintf(note, sizeof note, "change drawn x%.0f", mag);
            mb_svg_text(s, 3 * pw + 10, y0 + 12, 10, "end", COL_INK, note);
        }
    }
    free(x);
    int rc = emit_svg(f, s);
    mb_svg_close(s);
    return rc;
}

static int picture_variance(FILE *f, const mb_teach_report *r)
{
    const mb_shape_model *m = r->model;
    const double *eig = mb_shape_model_eig(m);
    double total = mb_shape_model_total_var(m);
    int n = mb_shape_model_n_eig(m), k = mb_shape_model_n_modes(m);
    if (n > 20)
        n = 20;
    const double W = 520, H = 220, L = 44, B = 30, T = 12;
    double bw = (W - L - 10) / n;
    mb_svg *s = NULL;
    if (mb_svg_open(W, H, &s) < 0)
        return MB_ENOMEM;
    double ph = H - B - T;
    mb_svg_line(s, L, T, L, H - B, COL_INK, 1, NULL);
    mb_svg_line(s, L, H - B, W - 6, H - B, COL_INK, 1, NULL);
    for (int t = 0; t <= 100; t += 25) {
        char lab[16];
        double y = H - B - ph * t / 100.0;
        snprintf(lab, sizeof lab, "%d %%", t);
        mb_svg_text(s, L - 4, y + 4, 10, "end", COL_INK, lab);
        mb_svg_line(s, L, y, W - 6, y, "#dde3e8", 0.5, NULL);
    }
    double cum = 0.0, px = 0, py = 0;
    for (int i = 0; i < n; i++) {
        double fr = total > 0 ? eig[i] / total : 0.0;
        double x = L + 4 + i * bw;
        mb_svg_rect(s, x, H - B - ph * fr, bw * 0.7, ph * fr,
                    i < k ? COL_BAR : "#c4ccd3", NULL);
        cum += fr;
        double cx = x + bw * 0.35, cy = H - B - ph * cum;
        if (i > 0)
            mb_svg_line(s, px, py, cx, cy, COL_PLUS, 1.5, NULL);
        mb_svg_circle(s, cx, cy, 2.2, COL_PLUS, NULL);
        px = cx;
        py = cy;
        char lab[8];
        snprintf(lab, sizeof lab, "%d", i + 1);
        mb_svg_text(s, cx, H - B + 13, 10, "middle", COL_INK, lab);
    }
    mb_svg_text(s, (W + L) / 2, H - 4, 11, "middle", COL_INK,
                "mode (dark bars: kept); line: cumulative variance explained");
    int rc = emit_svg(f, s);
    mb_svg_close(s);
    return rc;
}

static int picture_t2(FILE *f, const mb_teach_report *r)
{
    if (r->n_parts < 1)
        return MB_OK;
    const double W = 620, H = 240, L = 48, B = 34, T = 14;
    double lim = r->limits ? r->limits->t2_limit : 0.0, ymax = lim;
    for (int i = 0; i < r->n_parts; i++)
        ymax = fmax(ymax, r->parts[i].t2);
    ymax = ymax > 0 ? ymax * 1.1 : 1.0;
    mb_svg *s = NULL;
    if (mb_svg_open(W, H, &s) < 0)
        return MB_ENOMEM;
    double ph = H - B - T, pw = W - L - 10;
    mb_svg_line(s, L, T, L, H - B, COL_INK, 1, NULL);
    mb_svg_line(s, L, H - B, W - 6, H - B, COL_INK, 1, NULL);
    for (int t = 0; t <= 4; t++) {
        char lab[24];
        double v = ymax * t / 4.0, y = H - B - ph * t / 4.0;
        snprintf(lab, sizeof lab, "%.1f", v);
        mb_svg_text(s, L - 4, y + 4, 10, "end", COL_INK, lab);
    }
    double step = pw / r->n_parts;
    for (int i = 0; i < r->n_parts; i++) {
        double x = L + (i + 0.5) * step;
        double y = H - B - ph * r->parts[i].t2 / ymax;
        int bad = r->parts[i].outlier || (lim > 0 && r->parts[i].t2 > lim);
        mb_svg_line(s, x, H - B, x, y, bad ? COL_BAD : COL_BAR, fmin(6, step * 0.5), NULL);
        if (r->parts[i].outlier)
            mb_svg_text(s, x, y - 4, 10, "middle", COL_BAD, "out");
    }
    if (lim > 0) {
        double y = H - B - ph * lim / ymax;
        char lab[64];
        mb_svg_line(s, L, y, W - 6, y, COL_BAD, 1.2, "6,4");
        snprintf(lab, sizeof lab, "limit %.2f", lim);
        mb_svg_text(s, W - 8, y - 4, 10, "end", COL_BAD, lab);
    }
    mb_svg_text(s, (W + L) / 2, H - 6, 11, "middle", COL_INK,
                "training part (in file order); height: T^2 left out of the model");
    int rc = emit_svg(f, s);
    mb_svg_close(s);
    return rc;
}

static void esc(FILE *f, const char *t) { mb_html_escape(f, t ? t : ""); }

int mb_teach_report_write(const char *path, const mb_teach_report *r,
                          char *err)
{
    if (!path || !r || !r->model)
        return mb_err_set(err, MB_EINVAL, "teach report: nothing to write");
    char *buf = NULL;
    size_t len = 0;
    FILE *f = open_memstream(&buf, &len);
    if (!f)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
    int rc = MB_OK;
    fputs("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n"
          "<title>modeband teach report</title>\n<style>\n"
          "body{font-family:sans-serif;color:#25323f;margin:24px;max-width:1100px}\n"
          "h1{font-size:22px}h2{font-size:17px;margin-top:28px}\n"
          "table{border-collapse:collapse}td,th{padding:3px 10px;border-bottom:1px solid #dde3e8;text-align:left}\n"
          ".bad{color:#b3261e}.note{color:#5b6b7a;font-size:13px}\n"
          "pre{background:#f3f5f7;padding:10px}\n"
          "</style></head><body>\n", f);
    fputs("<h1>Teach report: ", f);
    esc(f, r->title);
    fputs("</h1>\n<p class=\"note\">", f);
    esc(f, r->generated);
    fputs(" &middot; modeband is a quality-inspection tool, not a safety device.</p>\n", f);
    if (r->n_summary > 0) {
        fputs("<h2>Summary</h2>\n<pre>", f);
        for (int i = 0; i < r->n_summary; i++) {
            esc(f, r->summary[i]);
            fputc('\n', f);
        }
        fputs("</pre>\n", f);
    }
    fputs("<h2>Mean shape</h2>\n", f);
    if (rc == 0)
        rc = picture_mean(f, r);
    fputs("<h2>Modes of variation</h2>\n<p class=\"note\">Each row is one mode: "
          "the shape at -3, 0 and +3 standard deviations, over the mean "
          "(dashed).</p>\n", f);
    if (rc == 0)
        rc = picture_modes(f, r);
    fputs("<h2>Variance explained per mode</h2>\n", f);
    if (rc == 0)
        rc = picture_variance(f, r);
    if (r->n_parts > 0) {
        fputs("<h2>T<sup>2</sup> of every training part</h2>\n", f);
        if (rc == 0)
            rc = picture_t2(f, r);
        fputs("<table><tr><th>part</th><th>T<sup>2</sup></th><th>note</th></tr>\n", f);
        for (int i = 0; i < r->n_parts; i++) {
            fprintf(f, "<tr%s><td>", r->parts[i].outlier ? " class=\"bad\"" : "");
            esc(f, r->parts[i].name);
            fprintf(f, "</td><td>%.2f</td><td>", r->parts[i].t2);
            esc(f, r->parts[i].outlier ? "left out (outlier)" : "");
            if (r->parts[i].note && r->parts[i].note[0]) {
                fputs(r->parts[i].outlier ? "; " : "", f);
                esc(f, r->parts[i].note);
            }
            fputs("</td></tr>\n", f);
        }
        fputs("</table>\n", f);
    }
    if (r->n_skipped > 0) {
        fputs("<h2>Images not used</h2>\n<table><tr><th>image</th><th>reason</th></tr>\n", f);
        for (int i = 0; i < r->n_skipped; i++) {
            fputs("<tr><td>", f);
            esc(f, r->skipped[i].name);
            fputs("</td><td>", f);
            esc(f, r->skipped[i].reason);
            fputs("</td></tr>\n", f);
        }
        fputs("</table>\n", f);
    }
    fputs("</body></html>\n", f);
    if (fclose(f) != 0 && rc == 0)
        rc = MB_ENOMEM;
    if (rc < 0) {
        free(buf);
        return mb_err_set(err, rc, "%s: out of memory while making the report", path);
    }
    rc = mb_file_write_atomic(path, buf, len, err);
    free(buf);
    return rc;
}
