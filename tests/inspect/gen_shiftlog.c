/*
 * tests/inspect/gen_shiftlog.c - writes shift logs (io/shiftlog_format.h)
 * with known statistics, for the report tests and the report benchmark.
 *
 *   gen_shiftlog DIR [--shifts N] [--parts N] [--rate HZ] [--seed S]
 *                [--drift-from N] [--drift-per-part MM] [--reject-rate F]
 *                [--torn] [--newer] [--model-change] [--empty-shift]
 *                [--images N] [--full-precision]
 *
 * Shifts are 8 h long, three a day (early 06:00, late 14:00, night 22:00),
 * starting 2026-12-01, parts at a steady rate. Gauges: "od" (nominal 40.0,
 * sd 0.02, tolerance -0.1/+0.1) and "id" (30.0, sd 0.015, -0.08/+0.08).
 * From part --drift-from on, "od" creeps up by --drift-per-part mm per part.
 * A part is a reject when a gauge is out of tolerance or, with probability
 * --reject-rate, by a drawn local defect (nick or flash, angles clustered
 * near 90 degrees) or T^2. Drift records come from inspect/drift.h run
 * exactly as the station would (target nominal, sigma the gauge's sd).
 * --images N writes a small PNG for each of the first N rejects into
 * DIR/../images and names it in the record.
 */
#include "drift.h"
#include "error.h"
#include "image.h"
#include "image_file.h"
#include "json_util.h"
#include "shiftlog_format.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static uint64_t rng_state;

static uint64_t rnd_u64(void)
{
    /* splitmix64 (Steele, Lea, Flood, OOPSLA 2014) */
    uint64_t z = (rng_state += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
}

static double rnd_unit(void)
{
    return (double)(rnd_u64() >> 11) * (1.0 / 9007199254740992.0);
}

static double rnd_normal(void)
{
    double u = rnd_unit(), v = rnd_unit();
    if (u < 1e-300)
        u = 1e-300;
    return sqrt(-2.0 * log(u)) * cos(2.0 * M_PI * v);
}

static int full_precision;

/* A number as the log writer might print it. */
static void num(FILE *f, double v)
{
    if (full_precision) {
        char b[MB_JSON_NUMBER_LEN];
        mb_json_format_double(v, b);
        fputs(b, f);
    } else {
        fprintf(f, "%.9g", v); /* as io/shiftlog.c writes */
    }
}

static void stamp(char *out, size_t n, int day, double sec)
{
    /* 2026-12-01 + day, local time +01:00 */
    static const int mdays[] = {31, 31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    int y = 2026, m = 12, d = 1 + day;
    int extra = (int)floor(sec / 86400.0);
    d += extra;
    sec -= extra * 86400.0;
    while (d > mdays[m % 12 == 0 ? 0 : m]) {
        d -= mdays[m % 12 == 0 ? 0 : m];
        if (++m > 12) {
            m = 1;
            y++;
        }
    }
    int ms = (int)floor(sec * 1000.0 + 0.5);
    int hh = ms / 3600000, mm = ms / 60000 % 60, ss = ms / 1000 % 60;
    snprintf(out, n, "%04d-%02d-%02dT%02d:%02d:%02d.%03d+01:00", y, m, d, hh, mm,
             ss, ms % 1000);
}

static void head(FILE *f, const char *kind, const char *time)
{
    fprintf(f, "{\"format\":\"" MB_SHIFTLOG_FORMAT "\",\"version\":%d,"
               "\"kind\":\"%s\",\"time\":\"%s\"",
            MB_SHIFTLOG_VERSION, kind, time);
}

typedef struct {
    const char *name;
    double nominal, sd, lo, hi;
} gauge_spec;

static const gauge_spec gauges[2] = {{"od", 40.0, 0.02, -0.1, 0.1},
                                     {"id", 30.0, 0.015, -0.08, 0.08}};

static int write_image(const char *dir, long n, double angle_deg, char *rel,
                       size_t rel_len)
{
    char path[4096];
    mb_image img;
    if (mb_image_alloc(96, 96, &img))
        return -1;
    double a = angle_deg * M_PI / 180.0;
    for (int y = 0; y < 96; y++)
        for (int x = 0; x < 96; x++) {
            double dx = x - 47.5, dy = y - 47.5, r = hypot(dx, dy);
            int v = (r > 28 && r < 40) ? 40 : 220;
            double nx = 47.5 + 40 * cos(a), ny = 47.5 - 40 * sin(a);
            if (hypot(x - nx, y - ny) < 5)
                v = 220;
            img.pixels[y * img.stride + x] = (uint8_t)v;
        }
    snprintf(rel, rel_len, "images/reject_%06ld.png", n);
    snprintf(path, sizeof path, "%s/../%s", dir, rel);
    int rc = mb_image_save_png(path, &img, NULL);
    mb_image_free(&img);
    return rc;
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: gen_shiftlog DIR [options] (see source)\n");
        return 2;
    }
    const char *dir = argv[1];
    int shifts = 1, torn = 0, newer = 0, model_change = 0, empty_shift = 0;
    long parts = 1000, drift_from = -1, images = 0;
    double rate = 5.0, drift_per = 0.0, reject_rate = 0.02;
    rng_state = 1;
    for (int i = 2; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : "0";
        if (!strcmp(a, "--shifts")) shifts = atoi(v), i++;
        else if (!strcmp(a, "--parts")) parts = atol(v), i++;
        else if (!strcmp(a, "--rate")) rate = atof(v), i++;
        else if (!strcmp(a, "--seed")) rng_state = strtoull(v, NULL, 10), i++;
        else if (!strcmp(a, "--drift-from")) drift_from = atol(v), i++;
        else if (!strcmp(a, "--drift-per-part")) drift_per = atof(v), i++;
        else if (!strcmp(a, "--reject-rate")) reject_rate = atof(v), i++;
        else if (!strcmp(a, "--images")) images = atol(v), i++;
        else if (!strcmp(a, "--torn")) torn = 1;
        else if (!strcmp(a, "--newer")) newer = 1;
        else if (!strcmp(a, "--model-change")) model_change = 1;
        else if (!strcmp(a, "--empty-shift")) empty_shift = 1;
        else if (!strcmp(a, "--full-precision")) full_precision = 1;
        else {
            fprintf(stderr, "gen_shiftlog: unknown option %s\n", a);
            return 2;
        }
    }
    mkdir(dir, 0777);
    if (images > 0) {
        char idir[4096];
        snprintf(idir, sizeof idir, "%s/../images", dir);
        mkdir(idir, 0777);
    }
    static const char *const names[3] = {"early", "late", "night"};
    static const double starts[3] = {6 * 3600.0, 14 * 3600.0, 22 * 3600.0};
    mb_drift_config dc;
    mb_drift_config_default(&dc);
    uint32_t seq = 0;
    long global = 0, written_images = 0;
    const char *checksum = "sha256:1f2e3d4c5b6a";
    for (int sh = 0; sh < shifts; sh++) {
        int day = sh / 3, which = sh % 3;
        char date[16], path[4096], t[64];
        stamp(t, sizeof t, day, 0);
        memcpy(date, t, 10);
        date[10] = '\0';
        snprintf(path, sizeof path, "%s/%s_%s.jsonl", dir, date, names[which]);
        FILE *f = fopen(path, "w");
        if (!f) {
            fprintf(stderr, "gen_shiftlog: cannot write %s\n", path);
            return 1;
        }
        double t0 = starts[which];
        stamp(t, sizeof t, day, t0);
        head(f, "shift-start", t);
        fprintf(f, ",\"shift\":\"%s\",\"date\":\"%s\",\"station\":\"line-3\","
                   "\"model\":\"models/rg4030.json\",\"model_checksum\":\"%s\","
                   "\"slot\":0}\n", names[which], date, checksum);
        long n_here = (empty_shift && sh == shifts - 1) ? 0 : parts;
        mb_drift_chart ch[2];
        int last_dir[2] = {1, 1};
        for (int g = 0; g < 2; g++)
            mb_drift_init(&ch[g], &dc, gauges[g].nominal, gauges[g].sd);
        long passes = 0, rejects = 0, faults = 0, drift_signals = 0;
        long nick = 0, flash = 0, gauge_rej = 0, t2_rej = 0;
        for (long i = 0; i < n_here; i++, global++) {
            double ts = t0 + (double)i / rate;
            seq++;
            if (model_change && i == n_here / 2) {
                checksum = "sha256:9a8b7c6d5e4f";
                stamp(t, sizeof t, day, ts - 0.05);
                head(f, "model", t);
                fprintf(f, ",\"event\":\"changed\",\"slot\":1,\"path\":"
                           "\"models/rg4030b.json\",\"model_checksum\":\"%s\"}\n",
                        checksum);
            }
            if (i == n_here / 3 && n_here > 10) {
                stamp(t, sizeof t, day, ts - 0.1);
                head(f, "fault", t);
                fprintf(f, ",\"source\":\"camera\",\"state\":\"lost\",\"code\":-12,"
                           "\"text\":\"camera \\\"cam0\\\" stopped sending frames\"}\n");
                stamp(t, sizeof t, day, ts - 0.02);
                head(f, "fault", t);
                fprintf(f, ",\"source\":\"camera\",\"state\":\"restored\",\"code\":0,"
                           "\"text\":\"camera back\",\"duration_s\":4.5}\n");
            }
            double val[2];
            int ok[2];
            for (int g = 0; g < 2; g++) {
                val[g] = gauges[g].nominal + gauges[g].sd * rnd_normal();
                if (g == 0 && drift_from >= 0 && i >= drift_from)
                    val[g] += drift_per * (double)(i - drift_from);
                ok[g] = val[g] >= gauges[g].nominal + gauges[g].lo &&
                        val[g] <= gauges[g].nominal + gauges[g].hi;
            }
            double modes[6];
            double t2 = 0;
            for (int k = 0; k < 6; k++) {
                modes[k] = rnd_normal();
                t2 += modes[k] * modes[k];
            }
            int defect = rnd_unit() < reject_rate ? 1 + (int)(rnd_unit() * 3) : 0;
            if (defect == 3)
                t2 += 40;
            double ang = fmod(90.0 + 25.0 * rnd_normal() + 360.0, 360.0);
            if (defect == 2)
                ang = 360.0 * rnd_unit();
            int fault = rnd_unit() < 0.001;
            const char *verdict = fault ? "fault"
                                  : (defect || !ok[0] || !ok[1]) ? "reject"
                                                                 : "pass";
            const char *reason = NULL;
            int code = 0;
            if (fault) {
                reason = "no-part";
                code = 1;
                faults++;
            } else if (defect == 1) {
                reason = "nick", code = 7, nick++;
            } else if (defect == 2) {
                reason = "flash", code = 8, flash++;
            } else if (defect == 3) {
                reason = "t2", code = 5, t2_rej++;
            } else if (!ok[0] || !ok[1]) {
                reason = "gauge", code = 12, gauge_rej++;
            }
            if (!strcmp(verdict, "pass"))
                passes++;
            else if (!strcmp(verdict, "reject"))
                rejects++;
            stamp(t, sizeof t, day, ts);
            head(f, "part", t);
            fprintf(f, ",\"seq\":%u,\"frame_seq\":%ld,\"slot\":0,\"part\":"
                       "\"RG-4030\",\"model_checksum\":\"%s\",\"verdict\":\"%s\","
                       "\"reason\":",
                    seq, global + 17, checksum, verdict);
            if (reason)
                fprintf(f, "\"%s\",\"code\":%d", reason, code);
            else
                fprintf(f, "null,\"code\":0");
            fprintf(f, ",\"reasons\":[");
            if (reason && (defect == 1 || defect == 2)) {
                fprintf(f, "{\"code\":%d,\"name\":\"%s\",\"text\":\"%s on the outer "
                           "edge at %.0f\\u00b0\",\"value\":",
                        code, reason, reason, ang);
                num(f, 0.3 + 0.2 * rnd_unit());
                fprintf(f, ",\"limit\":0.15,\"outline\":0,\"position\":");
                num(f, ang / 360.0);
                fprintf(f, ",\"angle_deg\":");
                num(f, ang);
                fprintf(f, ",\"depth_mm\":");
                num(f, 0.3 + 0.2 * rnd_unit());
                fprintf(f, ",\"extent_mm\":");
                num(f, 1.0 + rnd_unit());
                fputc('}', f);
            } else if (reason) {
                fprintf(f, "{\"code\":%d,\"name\":\"%s\",\"text\":\"%s\","
                           "\"value\":1.5,\"limit\":1.0}", code, reason, reason);
            }
            fprintf(f, "],\"pose\":");
            if (fault) {
                fputs("null", f);
            } else {
                fputs("{\"x\":", f);
                num(f, 640 + 100 * rnd_normal());
                fputs(",\"y\":", f);
                num(f, 512 + 80 * rnd_normal());
                fputs(",\"angle\":", f);
                num(f, 360 * rnd_unit());
                fputs(",\"scale\":", f);
                num(f, 1 + 0.002 * rnd_normal());
                fputc('}', f);
            }
            fputs(",\"modes\":[", f);
            for (int k = 0; k < 6; k++) {
                if (k)
                    fputc(',', f);
                num(f, modes[k]);
            }
            fputs("],\"t2\":", f);
            num(f, t2);
            fputs(",\"residual\":", f);
            num(f, 0.02 + 0.005 * fabs(rnd_normal()));
            fputs(",\"size_mm\":", f);
            num(f, 35 + 0.01 * rnd_normal());
            fputs(",\"gauges\":[", f);
            for (int g = 0; g < 2; g++) {
                fprintf(f, "%s{\"name\":\"%s\",\"value_mm\":", g ? "," : "",
                        gauges[g].name);
                num(f, val[g]);
                fprintf(f, ",\"nominal_mm\":%g,\"tol_lo_mm\":%g,\"tol_hi_mm\":%g,"
                           "\"ok\":%s}",
                        gauges[g].nominal, gauges[g].lo, gauges[g].hi,
                        ok[g] ? "true" : "false");
            }
            fputs("],\"cycle_ms\":", f);
            num(f, 8 + 2 * rnd_unit());
            fputs(",\"image\":", f);
            char rel[256];
            if (!strcmp(verdict, "reject") && written_images < images &&
                !write_image(dir, global, ang, rel, sizeof rel)) {
                written_images++;
                fprintf(f, "\"%s\"}\n", rel);
            } else {
                fputs("null}\n", f);
            }
            /* the drift charts, as the station runs them */
            for (int g = 0; g < 2; g++) {
                mb_drift_event ev = mb_drift_add(&ch[g], val[g], seq);
                if (ev == MB_DRIFT_NONE)
                    continue;
                if (ev == MB_DRIFT_SIGNAL) {
                    drift_signals++;
                    last_dir[g] = ch[g].direction;
                }
                head(f, "drift", t);
                fprintf(f, ",\"chart\":\"gauge:%s\",\"state\":\"%s\","
                           "\"direction\":\"%s\",\"ewma\":",
                        gauges[g].name,
                        ev == MB_DRIFT_SIGNAL ? "signal" : "cleared",
                        last_dir[g] < 0 ? "down" : "up");
                num(f, ch[g].z);
                fprintf(f, ",\"target\":%g,\"lcl\":", ch[g].target);
                num(f, ch[g].lcl);
                fputs(",\"ucl\":", f);
                num(f, ch[g].ucl);
                char st[64];
                stamp(st, sizeof st, day,
                      t0 + (double)(ch[g].since - 1) / rate);
                fprintf(f, ",\"since_seq\":%u,\"since_time\":\"%s\","
                           "\"parts_since\":%ld}\n",
                        ch[g].since_seq, st, ch[g].t - ch[g].since + 1);
            }
        }
        if (newer && sh == 0) {
            stamp(t, sizeof t, day, t0 + (double)n_here / rate);
            fprintf(f, "{\"format\":\"" MB_SHIFTLOG_FORMAT "\",\"version\":%d,"
                       "\"kind\":\"part\",\"time\":\"%s\",\"hologram\":[1,2]}\n",
                    MB_SHIFTLOG_VERSION + 1, t);
        }
        stamp(t, sizeof t, day, t0 + (double)n_here / rate + 1.0);
        head(f, "shift-end", t);
        fprintf(f, ",\"shift\":\"%s\",\"date\":\"%s\",\"parts\":%ld,\"passes\":%ld,"
                   "\"rejects\":%ld,\"faults\":%ld,\"yield\":",
                names[which], date, n_here, passes, rejects, faults);
        num(f, n_here ? (double)passes / (double)n_here : 0.0);
        fprintf(f, ",\"reasons\":{\"nick\":%ld,\"flash\":%ld,\"t2\":%ld,"
                   "\"gauge\":%ld},\"drift_signals\":%ld}\n",
                nick, flash, t2_rej, gauge_rej, drift_signals);
        if (torn && sh == shifts - 1)
            fprintf(f, "{\"format\":\"" MB_SHIFTLOG_FORMAT "\",\"version\":1,"
                       "\"kind\":\"part\",\"time\":\"2026-12-0");
        fclose(f);
    }
    return 0;
}
