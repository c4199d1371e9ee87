/*
 * inspect/cmd_inspect.c - `modeband inspect`: judge image files against a
 * taught model and say why, one line (or one JSON object) per image, in
 * the order given.
 */
#include "calib_file.h"
#include "cli.h"
#include "commands.h"
#include "error.h"
#include "image_file.h"
#include "model_file.h"
#include "verdict.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <sys/stat.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static const char *const inspect_help =
    "usage: modeband inspect --model MODEL [--mm-per-px F | --calib CAL.json]\n"
    "                        [--json]\n"
    "                        [--overlay DIR] IMAGE...\n"
    "\n"
    "Inspect each image (PGM or PNG) against the taught model: find the part,\n"
    "fit the model, measure the outline and judge it. Prints one line per\n"
    "image, in the order given: the verdict (pass, reject, fault) and every\n"
    "reason with its value, limit and place on the part.\n"
    "\n"
    "  --model MODEL   a model taught from images (modeband teach --images)\n"
    "  --mm-per-px F   scale for sizes and gauges (default: the model's)\n"
    "  --calib CAL.json  a calibration (modeband calibrate) for the model's\n"
    "                  frame size: gauges are measured on the conveyor plane\n"
    "                  in mm through it (perspective and lens distortion\n"
    "                  removed), sizes at the part's local scale\n"
    "  --json          one JSON object per image per line, with the keys\n"
    "                  image, verdict, reasons, pose, modes, t2, residual,\n"
    "                  outlines, gauges, ms\n"
    "  --overlay DIR   write DIR/<image>.png with the fitted model outline and\n"
    "                  the located deviations drawn on the image\n"
    "\n"
    "Exit status: 0 when every image was processed, whatever the verdicts;\n"
    "1 when the model cannot be used; 2 usage error. An unreadable image\n"
    "gives a fault line and processing goes on.\n";

static const char *verdict_word(mb_verdict_kind k)
{
    return k == MB_VERDICT_PASS ? "pass" : k == MB_VERDICT_REJECT ? "reject" : "fault";
}

static cJSON *number(double v)
{
    return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static cJSON *reason_json(const mb_reason *r)
{
    cJSON *o = cJSON_CreateObject();
    if (!o)
        return NULL;
    cJSON_AddNumberToObject(o, "code", r->code);
    cJSON_AddStringToObject(o, "name", mb_reason_name(r->code));
    cJSON_AddStringToObject(o, "text", r->text);
    cJSON_AddItemToObject(o, "value", number(r->value));
    cJSON_AddItemToObject(o, "limit", number(r->limit));
    if (r->code == MB_REASON_MODE)
        cJSON_AddNumberToObject(o, "mode", r->mode);
    if (mb_reason_located(r->code)) {
        cJSON_AddNumberToObject(o, "outline", r->outline);
        cJSON_AddNumberToObject(o, "position", r->position);
        cJSON_AddNumberToObject(o, "position_mm", r->position_mm);
        cJSON_AddNumberToObject(o, "angle_deg", r->angle_deg);
        cJSON_AddNumberToObject(o, "x", r->x);
        cJSON_AddNumberToObject(o, "y", r->y);
        cJSON_AddNumberToObject(o, "depth_px", r->depth_px);
        cJSON_AddNumberToObject(o, "depth_mm", r->depth_mm);
        cJSON_AddNumberToObject(o, "extent_mm", r->extent_mm);
    }
    return o;
}

static void print_json(const char *image, const mb_verdict *v)
{
    cJSON *o = cJSON_CreateObject();
    if (!o)
        return;
    cJSON_AddStringToObject(o, "image", image);
    cJSON_AddStringToObject(o, "verdict", verdict_word(v->verdict));
    cJSON *rs = cJSON_AddArrayToObject(o, "reasons");
    for (int i = 0; rs && i < v->n_reasons; i++)
        cJSON_AddItemToArray(rs, reason_json(&v->reasons[i]));
    if (v->measured) {
        cJSON *pose = cJSON_AddObjectToObject(o, "pose");
        if (pose) {
            cJSON_AddNumberToObject(pose, "x", v->pose.tx);
            cJSON_AddNumberToObject(pose, "y", v->pose.ty);
            cJSON_AddNumberToObject(pose, "angle", v->angle_deg);
            cJSON_AddNumberToObject(pose, "scale", v->scale);
        }
    } else {
        cJSON_AddNullToObject(o, "pose");
    }
    cJSON *modes = cJSON_AddArrayToObject(o, "modes");
    for (int q = 0; modes && v->b_sd && q < v->n_modes; q++)
        cJSON_AddItemToArray(modes, number(v->b_sd[q]));
    if (v->b_sd) {
        cJSON_AddItemToObject(o, "t2", number(v->t2));
        cJSON_AddItemToObject(o, "residual", number(v->spe));
        cJSON_AddItemToObject(o, "size_mm", number(v->size_mm));
        cJSON_AddItemToObject(o, "size_px", number(v->size_px));
    } else {
        cJSON_AddNullToObject(o, "t2");
        cJSON_AddNullToObject(o, "residual");
    }
    cJSON *outs = cJSON_AddArrayToObject(o, "outlines");
    if (outs && v->measured) {
        int first = 0;
        for (int ol = 0; ol < v->layout->n_outlines; ol++) {
            cJSON *pts = cJSON_CreateArray();
            for (int j = 0; pts && j < v->layout->counts[ol]; j++) {
                cJSON *p = cJSON_CreateArray();
                const double *xy = v->measured + 2 * (first + j);
                cJSON_AddItemToArray(p, cJSON_CreateNumber(round(xy[0] * 1000) / 1000));
                cJSON_AddItemToArray(p, cJSON_CreateNumber(round(xy[1] * 1000) / 1000));
                cJSON_AddItemToArray(pts, p);
            }
            cJSON_AddItemToArray(outs, pts);
            first += v->layout->counts[ol];
        }
    }
    cJSON *gs = cJSON_AddArrayToObject(o, "gauges");
    for (int g = 0; gs && g < v->n_gauges; g++) {
        cJSON *gj = cJSON_CreateObject();
        cJSON_AddStringToObject(gj, "name", v->gauges[g].name);
        cJSON_AddItemToObject(gj, "value_mm", number(v->gauges[g].value));
        cJSON_AddNumberToObject(gj, "nominal_mm", v->gauges[g].nominal);
        cJSON_AddItemToObject(gj, "deviation_mm", number(v->gauges[g].deviation));
        cJSON_AddBoolToObject(gj, "ok", v->gauges[g].ok);
        cJSON_AddItemToArray(gs, gj);
    }
    cJSON_AddNumberToObject(o, "ms", round(v->ms * 1000) / 1000);
    char *s = cJSON_PrintUnformatted(o);
    if (s) {
        puts(s);
        cJSON_free(s);
    }
    cJSON_Delete(o);
}

static void print_text(const char *image, const mb_verdict *v)
{
    printf("%s: %s", image, verdict_word(v->verdict));
    if (v->verdict == MB_VERDICT_PASS)
        printf(" (T^2 %.1f, size %.3f %s, %.2f ms)", v->t2,
               v->size_mm > 0 ? v->size_mm : v->size_px,
               v->size_mm > 0 ? "mm" : "px", v->ms);
    printf("\n");
    for (int i = 0; i < v->n_reasons; i++)
        printf("    %s: %s\n", mb_reason_name(v->reasons[i].code),
               v->reasons[i].text);
}

/* DIR/<image base name without extension>.png with the picture. */
static int write_overlay(const char *dir, const char *image, const mb_image *img,
                         const mb_verdict *v, char *err)
{
    const char *base = strrchr(image, '/');
    base = base ? base + 1 : image;
    char path[4096];
    const char *dot = strrchr(base, '.');
    int len = dot ? (int)(dot - base) : (int)strlen(base);
    snprintf(path, sizeof path, "%s/%.*s.png", dir, len, base);
    return mb_verdict_save_overlay(v, img, path, 0.0, err);
}

static void fault_unreadable(const char *image, const char *why, int json)
{
    mb_verdict v;
    memset(&v, 0, sizeof v);
    v.verdict = MB_VERDICT_FAULT;
    v.n_reasons = 1;
    v.reasons[0].code = MB_REASON_FRAME;
    snprintf(v.reasons[0].text, sizeof v.reasons[0].text, "%.190s", why);
    if (json)
        print_json(image, &v);
    else
        print_text(image, &v);
}

int mb_cmd_inspect(int argc, char **argv)
{
    const char *model = NULL, *overlay = NULL, *calib = NULL;
    double mm = 0.0;
    int json = 0, help = 0, npos = 0, seen_mm = 0;
    char err[MB_ERR_LEN];
    const char **pos = calloc((size_t)(argc > 0 ? argc : 1), sizeof *pos);
    if (!pos)
        return mb_cli_fail("inspect", "out of memory");
    const mb_opt opts[] = {
        {"model", MB_OPT_STRING, &model, NULL},
        {"mm-per-px", MB_OPT_DOUBLE, &mm, &seen_mm},
        {"json", MB_OPT_FLAG, &json, NULL},
        {"overlay", MB_OPT_STRING, &overlay, NULL},
        {"calib", MB_OPT_STRING, &calib, NULL},
    };
    int status = MB_EXIT_OK;
    mb_part_model pm;
    memset(&pm, 0, sizeof pm);
    mb_inspector *ins = NULL;
    if (mb_cli_parse(argc, argv, opts, sizeof opts / sizeof opts[0], pos, argc,
                     &npos, &help, err) < 0) {
        status = mb_cli_usage_error("inspect", err);
        goto done;
    }
    if (help) {
        fputs(inspect_help, stdout);
        goto done;
    }
    if (!model) {
        status = mb_cli_usage_error("inspect", "--model MODEL is required");
        goto done;
    }
    if (npos < 1) {
        status = mb_cli_usage_error("inspect", "give at least one IMAGE");
        goto done;
    }
    if (seen_mm && !(mm > 0)) {
        status = mb_cli_usage_error("inspect", "--mm-per-px must be positive");
        goto done;
    }
    if (seen_mm && calib) {
        status = mb_cli_usage_error("inspect", "give --mm-per-px or --calib, not both");
        goto done;
    }
    if (mb_part_model_load(model, &pm, err) < 0) {
        status = mb_cli_fail("inspect", err);
        goto done;
    }
    mb_inspect_params ip;
    mb_inspect_params_default(&ip);
    ip.mm_per_px = mm;
    mb_calib cal;
    if (calib) {
        if (mb_calib_file_load_for(calib, pm.imaging.width, pm.imaging.height, &cal,
                                   err) < 0) {
            status = mb_cli_fail("inspect", err);
            goto done;
        }
        ip.calib = &cal;
    }
    char cerr[MB_ERR_LEN];
    if (mb_inspector_create(&pm, &ip, &ins, cerr) < 0) {
        snprintf(err, sizeof err, "%.200s: %.300s", model, cerr);
        status = mb_cli_fail("inspect", err);
        goto done;
    }
    if (overlay && mkdir(overlay, 0777) != 0 && errno != EEXIST) {
        snprintf(err, sizeof err, "%s: cannot create the overlay folder: %s",
                 overlay, strerror(errno));
        status = mb_cli_fail("inspect", err);
        goto done;
    }
    for (int i = 0; i < npos; i++) {
        mb_image img;
        if (mb_image_load(pos[i], &img, err) < 0) {
            fault_unreadable(pos[i], err, json);
            continue;
        }
        mb_verdict v;
        mb_inspector_run(ins, &img, &v);
        if (json)
            print_json(pos[i], &v);
        else
            print_text(pos[i], &v);
        if (overlay) {
            if (write_overlay(overlay, pos[i], &img, &v, err) < 0)
                fprintf(stderr, "modeband inspect: %s\n", err);
        }
        fflush(stdout);
        mb_image_free(&img);
    }
done:
    mb_inspector_close(ins);
    mb_part_model_free(&pm);
    free(pos);
    return status;
}
