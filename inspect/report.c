/*
 * inspect/report.c - the shift report (see report.h): fold log records into
 * fixed-size summaries, then print them or draw them as one HTML page.
 */
#include "report.h"

#include "error.h"
#include "image.h"
#include "image_file.h"
#include "svg.h"

#include <errno.h>
#include <math.h>
#include <png.h>
#include <pthread.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#define MAX_REASONS 64
#define MAX_OUTLINES 8
#define POLAR_BINS 36
#define MAX_EVENTS 2000
#define MAX_FILES 4096
#define MAX_SHIFTS 512
#define MAX_MODELS 256
#define N_FIXED_SERIES 2 /* t2, size */
#define N_SERIES (N_FIXED_SERIES + MB_REPORT_MAX_GAUGES)

/* Colours of this report (own palette). */
#define C_INK "#1f2a36"
#define C_GRID "#d5dbe1"
#define C_BAR "#4d7a8c"
#define C_CUM "#d0822a"
#define C_REJ "#c0392b"
#define C_BAND "#cfe0e8"
#define C_LINE "#2b5d73"
#define C_LIMIT "#8e44ad"
#define C_DRIFT "#e08a00"

typedef struct {
    double sum, min, max, rej_val;
    long n, rejects;
} bin;

typedef struct {
    char name[MB_SLOG_NAME_LEN];
    long n, out;
    double mean, m2;
    double nominal, lo, hi;
    int have_tol, tol_changed;
} gauge_acc;

typedef struct {
    char name[MB_SLOG_NAME_LEN];
    long count;
} reason_count;

typedef struct {
    long hour; /* floor(t_local / 3600) */
    long parts, rejects;
} hour_count;

typedef struct {
    mb_slog_kind kind;
    char time[MB_SLOG_TIME_LEN];
    char a[MB_SLOG_NAME_LEN];  /* drift chart | fault source | model path */
    char b[MB_SLOG_TEXT_LEN];  /* fault text | checksums */
    char state[16], direction[8], since_time[MB_SLOG_TIME_LEN];
    double value, lo, hi, duration_s;
    long ordinal, parts_since;
    int code;
    uint32_t since_seq;
} event;

typedef struct {
    char path[MB_SLOG_PATH_LEN];
    long parts;
    mb_slog_stats st;
} file_info;

typedef struct {
    char image[MB_SLOG_PATH_LEN];
    char reason[MB_SLOG_NAME_LEN];
    char text[MB_SLOG_TEXT_LEN];
    char time[MB_SLOG_TIME_LEN];
    uint32_t seq;
} thumb;

struct mb_report {
    long parts, passes, rejects, faults;
    reason_count reasons[MAX_REASONS];
    int n_reasons;
    long reasons_other;
    long located[MAX_OUTLINES][MB_REPORT_ANGLE_BINS];
    long polar[MAX_OUTLINES][POLAR_BINS];
    long located_total;
    gauge_acc gauges[MB_REPORT_MAX_GAUGES];
    int n_gauges;
    long gauges_dropped;
    gauge_acc t2, size;
    hour_count *hours;
    int n_hours, cap_hours;
    /* run charts: bins of binw parts */
    bin (*series)[MB_REPORT_BINS]; /* N_SERIES x MB_REPORT_BINS */
    long binw;
    event *events;
    int n_events;
    long events_dropped;
    long fault_events, drift_signals, model_changes;
    file_info *files;
    int n_files;
    long files_skipped;
    char shifts[MAX_SHIFTS][MB_SLOG_NAME_LEN + 16];
    int n_shifts;
    thumb thumbs[MB_REPORT_THUMBS];
    int n_thumbs;
    long rejects_with_image;
    char last_checksum[MB_SLOG_NAME_LEN];
    char first_checksum[MB_SLOG_NAME_LEN]; /* the first one met */
    int first_from_part; /* ... and it was on a part, not a model record */
    double t_first, t_last; /* local clock of the first and last record */
    char time_first[MB_SLOG_TIME_LEN], time_last[MB_SLOG_TIME_LEN];
    const mb_report_filter *filter; /* during add_file */
    file_info *cur_file;
    char cur_shift[MB_SLOG_NAME_LEN];
    /* csv */
    FILE *csv;
    int csv_header;
    int csv_n_gauges;
    char csv_gauges[MB_SLOG_MAX_GAUGES][MB_SLOG_NAME_LEN];
    long csv_gauges_missing;
};

int mb_report_open(mb_report **out)
{
    mb_report *r = calloc(1, sizeof *r);
    if (!r)
        goto fail;
    r->series = calloc(N_SERIES, sizeof *r->series);
    r->events = calloc(MAX_EVENTS, sizeof *r->events);
    r->files = calloc(MAX_FILES, sizeof *r->files);
    if (!r->series || !r->events || !r->files)
        goto fail;
    r->binw = 1;
    r->t_first = r->t_last = NAN;
    *out = r;
    return 0;
fail:
    mb_report_close(r);
    *out = NULL;
    return MB_ENOMEM;
}

void mb_report_close(mb_report *r)
{
    if (!r)
        return;
    free(r->series);
    free(r->events);
    free(r->files);
    free(r->hours);
    free(r);
}

void mb_report_set_csv(mb_report *r, FILE *csv)
{
    r->csv = csv;
}

/* ---- accumulation ------------------------------------------------------ */

static void welford(gauge_acc *g, double x)
{
    g->n++;
    double d = x - g->mean;
    g->mean += d / (double)g->n;
    g->m2 += d * (x - g->mean);
}

/* Copy with truncation at a UTF-8 character boundary. */
static void cpy(char *dst, size_t cap, const char *src)
{
    size_t n = strlen(src);
    if (n >= cap) {
        n = cap - 1;
        while (n > 0 && ((unsigned char)src[n] & 0xC0) == 0x80)
            n--;
    }
    memcpy(dst, src, n);
    dst[n] = '\0';
}

static void count_reason_n(mb_report *r, const char *name, long n)
{
    if (!name[0])
        name = "(none)";
    for (int i = 0; i < r->n_reasons; i++)
        if (!strcmp(r->reasons[i].name, name)) {
            r->reasons[i].count += n;
            return;
        }
    if (r->n_reasons < MAX_REASONS) {
        cpy(r->reasons[r->n_reasons].name, MB_SLOG_NAME_LEN, name);
        r->reasons[r->n_reasons++].count = n;
    } else {
        r->reasons_other += n;
    }
}

static void count_reason(mb_report *r, const char *name)
{
    count_reason_n(r, name, 1);
}

static gauge_acc *find_gauge(mb_report *r, const char *name)
{
    for (int i = 0; i < r->n_gauges; i++)
        if (!strcmp(r->gauges[i].name, name))
            return &r->gauges[i];
    if (r->n_gauges == MB_REPORT_MAX_GAUGES) {
        r->gauges_dropped++;
        return NULL;
    }
    gauge_acc *g = &r->gauges[r->n_gauges++];
    memset(g, 0, sizeof *g);
    cpy(g->name, sizeof g->name, name);
    return g;
}

static int hour_slot(mb_report *r, long hour)
{
    int lo = 0, hi = r->n_hours;
    while (lo < hi) {
        int mid = (lo + hi) / 2;
        if (r->hours[mid].hour < hour)
            lo = mid + 1;
        else
            hi = mid;
    }
    if (lo < r->n_hours && r->hours[lo].hour == hour)
        return lo;
    if (r->n_hours == r->cap_hours) {
        int cap = r->cap_hours ? 2 * r->cap_hours : 64;
        hour_count *h = realloc(r->hours, (size_t)cap * sizeof *h);
        if (!h)
            return -1;
        r->hours = h;
        r->cap_hours = cap;
    }
    memmove(&r->hours[lo + 1], &r->hours[lo],
            (size_t)(r->n_hours - lo) * sizeof *r->hours);
    r->hours[lo].hour = hour;
    r->hours[lo].parts = r->hours[lo].rejects = 0;
    r->n_hours++;
    return lo;
}

/* Put value x of part number ord (0-based) into series s. */
static void bin_add(mb_report *r, int s, long ord, double x, int reject)
{
    if (!isfinite(x))
        return;
    bin *b = &r->series[s][ord / r->binw];
    if (b->n == 0) {
        b->min = b->max = x;
    } else {
        b->min = fmin(b->min, x);
        b->max = fmax(b->max, x);
    }
    b->sum += x;
    b->n++;
    if (reject) {
        b->rejects++;
        b->rej_val = x;
    }
}

/* Make room for part number ord: halve the resolution when it falls past
   the last bin. */
static void bins_make_room(mb_report *r, long ord)
{
    while (ord / r->binw >= MB_REPORT_BINS) {
        for (int s = 0; s < N_SERIES; s++) {
            bin *b = r->series[s];
            for (int i = 0; i < MB_REPORT_BINS / 2; i++) {
                bin m = b[2 * i], c = b[2 * i + 1];
                if (m.n == 0) {
                    m = c;
                } else if (c.n > 0) {
                    m.sum += c.sum;
                    m.n += c.n;
                    m.min = fmin(m.min, c.min);
                    m.max = fmax(m.max, c.max);
                    if (c.rejects)
                        m.rej_val = c.rej_val;
                    m.rejects += c.rejects;
                }
                b[i] = m;
            }
            memset(&b[MB_REPORT_BINS / 2], 0,
                   MB_REPORT_BINS / 2 * sizeof *b);
        }
        r->binw *= 2;
    }
}

static event *new_event(mb_report *r, const mb_slog_record *rec)
{
    if (r->n_events == MAX_EVENTS) {
        r->events_dropped++;
        return NULL;
    }
    event *e = &r->events[r->n_events++];
    memset(e, 0, sizeof *e);
    e->kind = rec->kind;
    cpy(e->time, sizeof e->time, rec->time);
    e->ordinal = r->parts;
    return e;
}

static void csv_str(FILE *f, const char *s)
{
    if (!strpbrk(s, ",\"\n\r")) {
        fputs(s, f);
        return;
    }
    fputc('"', f);
    for (; *s; s++) {
        if (*s == '"')
            fputc('"', f);
        fputc(*s, f);
    }
    fputc('"', f);
}

/* A number that reads back exactly: the log's own 9 digits when they do
   (the usual case, one conversion), else 17. */
static void csv_num(FILE *f, double v)
{
    if (isfinite(v)) {
        char b[40];
        snprintf(b, sizeof b, "%.9g", v);
        if (strtod(b, NULL) != v)
            snprintf(b, sizeof b, "%.17g", v);
        fputs(b, f);
    }
}

static void csv_row(mb_report *r, const mb_slog_record *rec)
{
    FILE *f = r->csv;
    if (!r->csv_header) {
        r->csv_header = 1;
        r->csv_n_gauges = rec->n_gauges;
        fputs("time,shift,seq,frame_seq,slot,part,model_checksum,verdict,"
              "reason,code,n_reasons,t2,residual,size_mm,cycle_ms",
              f);
        for (int k = 0; k < MB_SLOG_MAX_MODES; k++)
            fprintf(f, ",mode%d", k + 1);
        for (int g = 0; g < rec->n_gauges; g++) {
            cpy(r->csv_gauges[g], MB_SLOG_NAME_LEN, rec->gauges[g].name);
            fputc(',', f);
            csv_str(f, rec->gauges[g].name);
            fputs("_mm", f);
        }
        fputs(",image\n", f);
    }
    static const char *const verdicts[] = {"", "pass", "reject", "fault"};
    csv_str(f, rec->time);
    fputc(',', f);
    csv_str(f, r->cur_shift);
    fprintf(f, ",%u,%lld,%d,", rec->seq, (long long)rec->frame_seq, rec->slot);
    csv_str(f, rec->part);
    fputc(',', f);
    csv_str(f, rec->model_checksum);
    fprintf(f, ",%s,", verdicts[rec->verdict]);
    csv_str(f, rec->reason);
    fprintf(f, ",%d,%d,", rec->code, rec->n_reasons);
    csv_num(f, rec->t2);
    fputc(',', f);
    csv_num(f, rec->residual);
    fputc(',', f);
    csv_num(f, rec->size_mm);
    fputc(',', f);
    csv_num(f, rec->cycle_ms);
    for (int k = 0; k < MB_SLOG_MAX_MODES; k++) {
        fputc(',', f);
        if (k < rec->n_modes)
            csv_num(f, rec->modes[k]);
    }
    for (int g = 0; g < r->csv_n_gauges; g++) {
        fputc(',', f);
        for (int k = 0; k < rec->n_gauges; k++)
            if (!strcmp(rec->gauges[k].name, r->csv_gauges[g])) {
                csv_num(f, rec->gauges[k].value_mm);
                break;
            }
    }
    for (int k = 0; k < rec->n_gauges; k++) {
        int found = 0;
        for (int g = 0; g < r->csv_n_gauges && !found; g++)
            found = !strcmp(rec->gauges[k].name, r->csv_gauges[g]);
        if (!found)
            r->csv_gauges_missing++;
    }
    fputc(',', f);
    csv_str(f, rec->image);
    fputc('\n', f);
}

static void add_part(mb_report *r, const mb_slog_record *rec)
{
    long ord = r->parts;
    int reject = rec->verdict == MB_SLOG_REJECT;
    int fault = rec->verdict == MB_SLOG_FAULT_VERDICT;
    r->parts++;
    if (r->cur_file)
        r->cur_file->parts++;
    if (rec->verdict == MB_SLOG_PASS)
        r->passes++;
    else if (reject)
        r->rejects++;
    else if (fault)
        r->faults++;
    if (reject || fault)
        count_reason(r, rec->reason);

    /* model change seen on the parts themselves */
    if (rec->model_checksum[0]) {
        if (r->last_checksum[0] &&
            strcmp(r->last_checksum, rec->model_checksum)) {
            r->model_changes++;
            event *e = new_event(r, rec);
            if (e) {
                e->kind = MB_SLOG_MODEL;
                cpy(e->a, sizeof e->a, "checksum changed on the parts");
                snprintf(e->b, sizeof e->b, "%.60s -> %.60s", r->last_checksum,
                         rec->model_checksum);
            }
        }
        cpy(r->last_checksum, sizeof r->last_checksum, rec->model_checksum);
        if (!r->first_checksum[0]) {
            cpy(r->first_checksum, sizeof r->first_checksum, rec->model_checksum);
            r->first_from_part = 1;
        }
    }

    for (int i = 0; i < rec->n_reasons; i++) {
        const mb_slog_reason *x = &rec->reasons[i];
        if (x->outline < 0 || !isfinite(x->angle_deg))
            continue;
        int o = x->outline < MAX_OUTLINES ? x->outline : MAX_OUTLINES - 1;
        double a = fmod(x->angle_deg, 360.0);
        if (a < 0)
            a += 360.0;
        int b12 = (int)(a / 30.0), b36 = (int)(a / 10.0);
        r->located[o][b12 < MB_REPORT_ANGLE_BINS ? b12 : 0]++;
        r->polar[o][b36 < POLAR_BINS ? b36 : 0]++;
        r->located_total++;
    }

    if (isfinite(rec->t_local)) {
        int h = hour_slot(r, (long)floor(rec->t_local / 3600.0));
        if (h >= 0) {
            r->hours[h].parts++;
            r->hours[h].rejects += reject;
        }
    }

    bins_make_room(r, ord);
    if (isfinite(rec->t2)) {
        welford(&r->t2, rec->t2);
        bin_add(r, 0, ord, rec->t2, reject);
    }
    if (isfinite(rec->size_mm)) {
        welford(&r->size, rec->size_mm);
        bin_add(r, 1, ord, rec->size_mm, reject);
    }
    for (int k = 0; k < rec->n_gauges; k++) {
        const mb_slog_gauge *gg = &rec->gauges[k];
        if (!gg->name[0] || !isfinite(gg->value_mm))
            continue;
        gauge_acc *g = find_gauge(r, gg->name);
        if (!g)
            continue;
        welford(g, gg->value_mm);
        if (isfinite(gg->nominal_mm) && isfinite(gg->tol_lo_mm) &&
            isfinite(gg->tol_hi_mm)) {
            if (g->have_tol && (g->nominal != gg->nominal_mm ||
                                g->lo != gg->tol_lo_mm || g->hi != gg->tol_hi_mm))
                g->tol_changed = 1;
            g->have_tol = 1;
            g->nominal = gg->nominal_mm;
            g->lo = gg->tol_lo_mm;
            g->hi = gg->tol_hi_mm;
            if (gg->value_mm < g->nominal + g->lo ||
                gg->value_mm > g->nominal + g->hi)
                g->out++;
        }
        bin_add(r, N_FIXED_SERIES + (int)(g - r->gauges), ord, gg->value_mm,
                reject);
    }

    if (reject && rec->image[0]) {
        r->rejects_with_image++;
        if (r->n_thumbs < MB_REPORT_THUMBS) {
            thumb *t = &r->thumbs[r->n_thumbs++];
            cpy(t->image, sizeof t->image, rec->image);
            cpy(t->reason, sizeof t->reason, rec->reason);
            cpy(t->text, sizeof t->text,
                rec->n_reasons > 0 ? rec->reasons[0].text : "");
            cpy(t->time, sizeof t->time, rec->time);
            t->seq = rec->seq;
        }
    }
    if (r->csv)
        csv_row(r, rec);
}

void mb_report_add_record(mb_report *r, const mb_slog_record *rec)
{
    const mb_report_filter *f = r->filter;
    if (f && isfinite(rec->t_local)) {
        if (isfinite(f->from) && rec->t_local < f->from)
            return;
        if (isfinite(f->to) && rec->t_local >= f->to)
            return;
    } else if (f && (isfinite(f->from) || isfinite(f->to))) {
        return; /* no readable time: cannot be placed in the window */
    }
    if (isfinite(rec->t_local)) {
        if (!isfinite(r->t_first) || rec->t_local < r->t_first) {
            r->t_first = rec->t_local;
            cpy(r->time_first, sizeof r->time_first, rec->time);
        }
        if (!isfinite(r->t_last) || rec->t_local > r->t_last) {
            r->t_last = rec->t_local;
            cpy(r->time_last, sizeof r->time_last, rec->time);
        }
    }
    event *e;
    switch (rec->kind) {
    case MB_SLOG_PART:
        add_part(r, rec);
        break;
    case MB_SLOG_DRIFT:
        if (!strcmp(rec->state, "signal"))
            r->drift_signals++;
        if ((e = new_event(r, rec))) {
            cpy(e->a, sizeof e->a, rec->chart);
            cpy(e->state, sizeof e->state, rec->state);
            cpy(e->direction, sizeof e->direction, rec->direction);
            cpy(e->since_time, sizeof e->since_time, rec->since_time);
            e->value = rec->ewma;
            e->lo = rec->lcl;
            e->hi = rec->ucl;
            e->parts_since = rec->parts_since;
            e->since_seq = rec->since_seq;
        }
        break;
    case MB_SLOG_FAULT:
        r->fault_events++;
        if ((e = new_event(r, rec))) {
            cpy(e->a, sizeof e->a, rec->source);
            cpy(e->b, sizeof e->b, rec->text);
            cpy(e->state, sizeof e->state, rec->state);
            e->code = rec->code;
            e->duration_s = rec->duration_s;
        }
        break;
    case MB_SLOG_MODEL:
        if (!strcmp(rec->event, "changed"))
            r->model_changes++;
        if ((e = new_event(r, rec))) {
            cpy(e->a, sizeof e->a, rec->path);
            snprintf(e->b, sizeof e->b, "%s (slot %d, %.80s)", rec->event,
                     rec->slot, rec->model_checksum);
        }
        if (rec->model_checksum[0]) {
            cpy(r->last_checksum, sizeof r->last_checksum, rec->model_checksum);
            if (!r->first_checksum[0])
                cpy(r->first_checksum, sizeof r->first_checksum,
                    rec->model_checksum);
        }
        break;
    case MB_SLOG_SHIFT_START:
        if (r->n_shifts < MAX_SHIFTS)
            snprintf(r->shifts[r->n_shifts++], sizeof r->shifts[0], "%s %s",
                     rec->date, rec->shift);
        break;
    default:
        break;
    }
}

static int record_fn(const mb_slog_record *rec, void *user)
{
    mb_report_add_record(user, rec);
    return 0;
}

/* Does the file name <date>_<shift>.jsonl match the filter? */
static int name_matches(const char *path, const mb_report_filter *f, char *shift,
                        size_t cap)
{
    const char *base = strrchr(path, '/');
    base = base ? base + 1 : path;
    const char *us = strchr(base, '_');
    const char *dot = strrchr(base, '.');
    shift[0] = '\0';
    if (us && dot && dot > us)
        snprintf(shift, cap, "%.*s", (int)(dot - us - 1), us + 1);
    if (!f)
        return 1;
    if (f->date && (strncmp(base, f->date, strlen(f->date)) ||
                    base[strlen(f->date)] != '_'))
        return 0;
    if (f->shift && strcmp(shift, f->shift))
        return 0;
    return 1;
}

int mb_report_add_file(mb_report *r, const char *path,
                       const mb_report_filter *f, char *err)
{
    char shift[MB_SLOG_NAME_LEN];
    if (!name_matches(path, f, shift, sizeof shift)) {
        r->files_skipped++;
        return 1;
    }
    if (r->n_files == MAX_FILES)
        return mb_err_set(err, MB_ENOMEM, "%s: more than %d log files", path,
                          MAX_FILES);
    file_info *fi = &r->files[r->n_files++];
    memset(fi, 0, sizeof *fi);
    cpy(fi->path, sizeof fi->path, path);
    cpy(r->cur_shift, sizeof r->cur_shift, shift);
    r->cur_file = fi;
    r->filter = f;
    int rc = mb_slog_read_file(path, MB_SLOG_PARSER_SCAN, record_fn, r, &fi->st,
                               err);
    r->cur_file = NULL;
    r->filter = NULL;
    return rc;
}

/* ---- several files at once --------------------------------------------- */

/* Combine two Welford accumulators (Chan, Golub, LeVeque, "Algorithms for
   computing the sample variance", The American Statistician 37(3), 1983). */
static void welford_merge(gauge_acc *a, const gauge_acc *b)
{
    if (b->n == 0)
        return;
    if (a->n == 0) {
        a->n = b->n;
        a->mean = b->mean;
        a->m2 = b->m2;
        return;
    }
    double n = (double)(a->n + b->n), d = b->mean - a->mean;
    a->mean += d * (double)b->n / n;
    a->m2 += b->m2 + d * d * (double)a->n * (double)b->n / n;
    a->n += b->n;
}

/* Append the partial report s (one file, read after everything in r) to r. */
static void merge(mb_report *r, const mb_report *s)
{
    long off = r->parts;
    /* a change between files shows on the parts as a sequential read
       would see it (a model record at the file's start says it itself) */
    if (s->first_from_part && r->last_checksum[0] &&
        strcmp(r->last_checksum, s->first_checksum)) {
        r->model_changes++;
        if (r->n_events < MAX_EVENTS) {
            event *e = &r->events[r->n_events++];
            memset(e, 0, sizeof *e);
            e->kind = MB_SLOG_MODEL;
            e->ordinal = off;
            cpy(e->time, sizeof e->time, s->time_first);
            cpy(e->a, sizeof e->a, "checksum changed between files");
            snprintf(e->b, sizeof e->b, "%.60s -> %.60s", r->last_checksum,
                     s->first_checksum);
        } else {
            r->events_dropped++;
        }
    }
    if (s->last_checksum[0])
        cpy(r->last_checksum, sizeof r->last_checksum, s->last_checksum);
    if (!r->first_checksum[0])
        cpy(r->first_checksum, sizeof r->first_checksum, s->first_checksum);

    /* run charts: each of s's bins goes to r's bin of its first part */
    long total = off + s->parts;
    if (total > 0)
        bins_make_room(r, total - 1);
    for (int k = 0; k < N_SERIES; k++)
        for (int b = 0; b < MB_REPORT_BINS; b++) {
            const bin *x = &s->series[k][b];
            if (x->n == 0)
                continue;
            bin *y = &r->series[k][(off + (long)b * s->binw) / r->binw];
            if (y->n == 0) {
                *y = *x;
                continue;
            }
            y->min = fmin(y->min, x->min);
            y->max = fmax(y->max, x->max);
            y->sum += x->sum;
            y->n += x->n;
            if (x->rejects)
                y->rej_val = x->rej_val;
            y->rejects += x->rejects;
        }
    r->parts += s->parts;
    r->passes += s->passes;
    r->rejects += s->rejects;
    r->faults += s->faults;
    for (int i = 0; i < s->n_reasons; i++)
        count_reason_n(r, s->reasons[i].name, s->reasons[i].count);
    r->reasons_other += s->reasons_other;
    for (int o = 0; o < MAX_OUTLINES; o++) {
        for (int b = 0; b < MB_REPORT_ANGLE_BINS; b++)
            r->located[o][b] += s->located[o][b];
        for (int b = 0; b < POLAR_BINS; b++)
            r->polar[o][b] += s->polar[o][b];
    }
    r->located_total += s->located_total;
    for (int i = 0; i < s->n_gauges; i++) {
        const gauge_acc *x = &s->gauges[i];
        gauge_acc *g = find_gauge(r, x->name);
        if (!g)
            continue;
        welford_merge(g, x);
        g->out += x->out;
        if (x->have_tol) {
            if (g->have_tol && (g->nominal != x->nominal || g->lo != x->lo ||
                                g->hi != x->hi))
                g->tol_changed = 1;
            g->have_tol = 1;
            g->nominal = x->nominal;
            g->lo = x->lo;
            g->hi = x->hi;
        }
        g->tol_changed |= x->tol_changed;
    }
    r->gauges_dropped += s->gauges_dropped;
    welford_merge(&r->t2, &s->t2);
    welford_merge(&r->size, &s->size);
    for (int i = 0; i < s->n_hours; i++) {
        int h = hour_slot(r, s->hours[i].hour);
        if (h >= 0) {
            r->hours[h].parts += s->hours[i].parts;
            r->hours[h].rejects += s->hours[i].rejects;
        }
    }
    for (int i = 0; i < s->n_events; i++) {
        if (r->n_events == MAX_EVENTS) {
            r->events_dropped += s->n_events - i;
            break;
        }
        r->events[r->n_events] = s->events[i];
        r->events[r->n_events++].ordinal += off;
    }
    r->events_dropped += s->events_dropped;
    r->fault_events += s->fault_events;
    r->drift_signals += s->drift_signals;
    r->model_changes += s->model_changes;
    for (int i = 0; i < s->n_files && r->n_files < MAX_FILES; i++)
        r->files[r->n_files++] = s->files[i];
    r->files_skipped += s->files_skipped;
    for (int i = 0; i < s->n_shifts && r->n_shifts < MAX_SHIFTS; i++)
        memcpy(r->shifts[r->n_shifts++], s->shifts[i], sizeof r->shifts[0]);
    for (int i = 0; i < s->n_thumbs && r->n_thumbs < MB_REPORT_THUMBS; i++)
        r->thumbs[r->n_thumbs++] = s->thumbs[i];
    r->rejects_with_image += s->rejects_with_image;
    if (isfinite(s->t_first) &&
        (!isfinite(r->t_first) || s->t_first < r->t_first)) {
        r->t_first = s->t_first;
        cpy(r->time_first, sizeof r->time_first, s->time_first);
    }
    if (isfinite(s->t_last) && (!isfinite(r->t_last) || s->t_last > r->t_last)) {
        r->t_last = s->t_last;
        cpy(r->time_last, sizeof r->time_last, s->time_last);
    }
}

typedef struct {
    mb_report *part;
    const char *path;
    const mb_report_filter *filter;
    int rc;
    char err[MB_ERR_LEN];
} file_job;

static void *file_worker(void *arg)
{
    file_job *j = arg;
    j->rc = mb_report_add_file(j->part, j->path, j->filter, j->err);
    return NULL;
}

int mb_report_add_files(mb_report *r, char *const *paths, int n,
                        const mb_report_filter *f, int threads, char *err)
{
    if (threads > MB_REPORT_MAX_THREADS)
        threads = MB_REPORT_MAX_THREADS;
    if (threads <= 1 || r->csv || n <= 1) {
        for (int i = 0; i < n; i++) {
            int rc = mb_report_add_file(r, paths[i], f, err);
            if (rc < 0)
                return rc;
        }
        return 0;
    }
    file_job jobs[MB_REPORT_MAX_THREADS];
    pthread_t tid[MB_REPORT_MAX_THREADS];
    memset(jobs, 0, sizeof jobs);
    int rc = 0;
    for (int k = 0; k < threads; k++)
        if (mb_report_open(&jobs[k].part)) {
            rc = mb_err_set(err, MB_ENOMEM, "out of memory for the report");
            goto out;
        }
    for (int i = 0; i < n && !rc; i += threads) {
        int m = n - i < threads ? n - i : threads;
        int started[MB_REPORT_MAX_THREADS] = {0};
        for (int k = 0; k < m; k++) {
            jobs[k].path = paths[i + k];
            jobs[k].filter = f;
            jobs[k].rc = 0;
            if (k > 0 && pthread_create(&tid[k], NULL, file_worker, &jobs[k]) == 0)
                started[k] = 1;
        }
        /* this thread reads the first file of the batch, and any file a
           thread could not be started for */
        for (int k = 0; k < m; k++)
            if (!started[k])
                file_worker(&jobs[k]);
        for (int k = 1; k < m; k++)
            if (started[k])
                pthread_join(tid[k], NULL);
        for (int k = 0; k < m; k++) {
            if (jobs[k].rc < 0 && !rc) {
                rc = jobs[k].rc;
                if (err)
                    snprintf(err, MB_ERR_LEN, "%s", jobs[k].err);
            }
            if (!rc)
                merge(r, jobs[k].part);
            /* empty the partial for the next batch, keep its buffers */
            mb_report *p = jobs[k].part;
            bin (*series)[MB_REPORT_BINS] = p->series;
            event *events = p->events;
            file_info *files = p->files;
            hour_count *hours = p->hours;
            int cap_hours = p->cap_hours;
            memset(series, 0, N_SERIES * sizeof *series);
            memset(p, 0, sizeof *p);
            p->series = series;
            p->events = events;
            p->files = files;
            p->hours = hours;
            p->cap_hours = cap_hours;
            p->binw = 1;
            p->t_first = p->t_last = NAN;
        }
    }
out:
    for (int k = 0; k < threads; k++)
        mb_report_close(jobs[k].part);
    return rc;
}

/* ---- results ---------------------------------------------------------- */

static void gauge_result(const gauge_acc *g, mb_report_gauge *out)
{
    memset(out, 0, sizeof *out);
    cpy(out->name, sizeof out->name, g->name);
    out->n = g->n;
    out->out_of_tol = g->out;
    out->mean = g->n > 0 ? g->mean : NAN;
    out->sd = g->n > 1 ? sqrt(g->m2 / (double)(g->n - 1)) : NAN;
    out->nominal = g->have_tol ? g->nominal : NAN;
    out->lsl = g->have_tol ? g->nominal + g->lo : NAN;
    out->usl = g->have_tol ? g->nominal + g->hi : NAN;
    out->tol_changed = g->tol_changed;
    out->cp = out->cpk = NAN;
    if (g->have_tol && isfinite(out->sd) && out->sd > 0) {
        out->cp = (out->usl - out->lsl) / (6.0 * out->sd);
        out->cpk = fmin(out->usl - out->mean, out->mean - out->lsl) /
                   (3.0 * out->sd);
    }
}

int mb_report_gauge_count(const mb_report *r)
{
    return r->n_gauges;
}

void mb_report_gauge_get(const mb_report *r, int i, mb_report_gauge *out)
{
    gauge_result(&r->gauges[i], out);
}

void mb_report_totals_get(const mb_report *r, mb_report_totals *t)
{
    memset(t, 0, sizeof *t);
    t->parts = r->parts;
    t->passes = r->passes;
    t->rejects = r->rejects;
    t->faults = r->faults;
    t->yield = r->parts ? (double)r->passes / (double)r->parts : NAN;
    t->fault_events = r->fault_events;
    t->drift_signals = r->drift_signals;
    t->model_changes = r->model_changes;
    t->files = r->n_files;
    for (int i = 0; i < r->n_files; i++) {
        t->torn += r->files[i].st.torn;
        t->invalid += r->files[i].st.invalid;
        t->newer += r->files[i].st.newer;
        t->empty_shifts += r->files[i].parts == 0;
    }
}

/* Reasons sorted by count, descending (ties by name). */
static int cmp_reason(const void *a, const void *b)
{
    const reason_count *x = a, *y = b;
    if (x->count != y->count)
        return x->count < y->count ? 1 : -1;
    return strcmp(x->name, y->name);
}

static int sorted_reasons(const mb_report *r, reason_count *out)
{
    memcpy(out, r->reasons, (size_t)r->n_reasons * sizeof *out);
    qsort(out, (size_t)r->n_reasons, sizeof *out, cmp_reason);
    return r->n_reasons;
}

static void hour_label(long hour, char *buf, size_t n)
{
    /* local clock hours since 1970 -> YYYY-MM-DD HH:00 (civil from days,
       the inverse of the era arithmetic in io/shiftlog_read.c) */
    long z = (hour >= 0 ? hour / 24 : (hour - 23) / 24) + 719468;
    int hh = (int)(hour - (z - 719468) * 24);
    long era = (z >= 0 ? z : z - 146096) / 146097;
    long doe = z - era * 146097;
    long yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
    long y = yoe + era * 400;
    long doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    long mp = (5 * doy + 2) / 153;
    int d = (int)(doy - (153 * mp + 2) / 5 + 1);
    int m = (int)(mp < 10 ? mp + 3 : mp - 9);
    y += m <= 2;
    snprintf(buf, n, "%04ld-%02d-%02d %02d:00", y, m, d, hh);
}

static void fmt_num(char *buf, size_t n, double v, const char *fmt)
{
    if (isfinite(v))
        snprintf(buf, n, fmt, v);
    else
        snprintf(buf, n, "-");
}

/* Notes on the input a reader must know about; each line to out through
   the callback so the terminal and the page say the same. */
typedef void (*note_fn)(void *ctx, const char *fmt, ...);

static void notes(const mb_report *r, note_fn note, void *ctx)
{
    mb_report_totals t;
    mb_report_totals_get(r, &t);
    if (t.files == 0)
        note(ctx, "no log file matched the selection");
    for (int i = 0; i < r->n_files; i++) {
        const file_info *f = &r->files[i];
        if (f->st.torn)
            note(ctx, "%s: the last line is torn (cut off while being written); skipped",
                 f->path);
        if (f->st.invalid)
            note(ctx, "%s: %ld line(s) are not valid shift-log records (first at line %ld); skipped",
                 f->path, f->st.invalid, f->st.first_invalid);
        if (f->st.newer)
            note(ctx, "%s: %ld line(s) of format version %d, newer than this reader's %d; skipped (use a newer modeband)",
                 f->path, f->st.newer, f->st.newest_version, MB_SHIFTLOG_VERSION);
        if (f->parts == 0)
            note(ctx, "%s: no parts in this shift (or none in the time window)",
                 f->path);
    }
    if (r->model_changes)
        note(ctx, "the model changed %ld time(s) within the window: gauge statistics mix parts judged by different models (see the events)",
             r->model_changes);
    for (int i = 0; i < r->n_gauges; i++)
        if (r->gauges[i].tol_changed)
            note(ctx, "gauge %s: its tolerance changed within the window; Cp/Cpk use the latest",
                 r->gauges[i].name);
    if (r->events_dropped)
        note(ctx, "%ld events beyond the first %d are counted but not listed",
             r->events_dropped, MAX_EVENTS);
    if (r->csv_gauges_missing)
        note(ctx, "%ld gauge values had no CSV column (gauges not on the first part)",
             r->csv_gauges_missing);
    if (r->gauges_dropped)
        note(ctx, "%ld gauge values beyond %d gauge names ignored",
             r->gauges_dropped, MB_REPORT_MAX_GAUGES);
}

static void note_print(void *ctx, const char *fmt, ...)
{
    FILE *out = ctx;
    va_list ap;
    va_start(ap, fmt);
    fputs("  note: ", out);
    vfprintf(out, fmt, ap);
    fputc('\n', out);
    va_end(ap);
}

void mb_report_print(const mb_report *r, FILE *out)
{
    mb_report_totals t;
    mb_report_totals_get(r, &t);
    fprintf(out, "shift report: %ld file(s)", t.files);
    if (r->time_first[0])
        fprintf(out, ", %s .. %s", r->time_first, r->time_last);
    fputc('\n', out);
    for (int i = 0; i < r->n_shifts; i++)
        fprintf(out, "%s%s", i ? ", " : "  shifts: ", r->shifts[i]);
    if (r->n_shifts)
        fputc('\n', out);
    fprintf(out, "  parts %ld  passes %ld  rejects %ld  faults %ld  yield ",
            t.parts, t.passes, t.rejects, t.faults);
    if (t.parts)
        fprintf(out, "%.2f %%\n", 100.0 * t.yield);
    else
        fprintf(out, "- (no parts)\n");
    notes(r, note_print, out);

    reason_count rs[MAX_REASONS];
    int n = sorted_reasons(r, rs);
    long total = r->rejects + r->faults;
    if (n) {
        fprintf(out, "\nreject and fault reasons (Pareto)\n");
        fprintf(out, "  %-20s %9s %8s %11s\n", "reason", "count", "percent",
                "cumulative");
        long cum = 0;
        for (int i = 0; i < n; i++) {
            cum += rs[i].count;
            fprintf(out, "  %-20s %9ld %7.2f%% %10.2f%%\n", rs[i].name,
                    rs[i].count, 100.0 * rs[i].count / (double)total,
                    100.0 * cum / (double)total);
        }
    }
    if (r->located_total) {
        fprintf(out, "\nlocated defects: %ld, by outline and angle (bins of 30 degrees)\n",
                r->located_total);
        fprintf(out, "  %-8s", "outline");
        for (int b = 0; b < MB_REPORT_ANGLE_BINS; b++)
            fprintf(out, " %6d", b * 30);
        fputc('\n', out);
        for (int o = 0; o < MAX_OUTLINES; o++) {
            long s = 0;
            for (int b = 0; b < MB_REPORT_ANGLE_BINS; b++)
                s += r->located[o][b];
            if (!s)
                continue;
            fprintf(out, "  %-8d", o);
            for (int b = 0; b < MB_REPORT_ANGLE_BINS; b++)
                fprintf(out, " %6ld", r->located[o][b]);
            fputc('\n', out);
        }
    }
    if (r->n_gauges) {
        fprintf(out, "\ngauges (mm; Cp = (USL-LSL)/6s, Cpk = min(USL-mean, mean-LSL)/3s)\n");
        fprintf(out, "  %-12s %8s %12s %11s %10s %10s %8s %8s %6s\n", "gauge",
                "n", "mean", "sd", "LSL", "USL", "Cp", "Cpk", "out");
        for (int i = 0; i < r->n_gauges; i++) {
            mb_report_gauge g;
            gauge_result(&r->gauges[i], &g);
            char a[32], b[32], c[32], d[32], e[32], f[32];
            fmt_num(a, sizeof a, g.mean, "%.6f");
            fmt_num(b, sizeof b, g.sd, "%.7f");
            fmt_num(c, sizeof c, g.lsl, "%.4f");
            fmt_num(d, sizeof d, g.usl, "%.4f");
            fmt_num(e, sizeof e, g.cp, "%.4f");
            fmt_num(f, sizeof f, g.cpk, "%.4f");
            fprintf(out, "  %-12s %8ld %12s %11s %10s %10s %8s %8s %6ld\n",
                    g.name, g.n, a, b, c, d, e, f, g.out_of_tol);
        }
    }
    if (r->t2.n) {
        fprintf(out, "  T^2: mean %.4f, sd %.4f over %ld parts\n", r->t2.mean,
                r->t2.n > 1 ? sqrt(r->t2.m2 / (double)(r->t2.n - 1)) : 0.0,
                r->t2.n);
    }
    if (r->n_hours) {
        fprintf(out, "\nrejects per hour (local time)\n");
        for (int i = 0; i < r->n_hours; i++) {
            char lab[32];
            hour_label(r->hours[i].hour, lab, sizeof lab);
            fprintf(out, "  %s  parts %7ld  rejects %6ld  (%.2f %%)\n", lab,
                    r->hours[i].parts, r->hours[i].rejects,
                    100.0 * r->hours[i].rejects /
                        (double)(r->hours[i].parts ? r->hours[i].parts : 1));
        }
    }
    if (r->fault_events) {
        fprintf(out, "\ncamera, PLC and other faults: %ld event(s)\n",
                r->fault_events);
        static const char *const sources[] = {"camera", "plc", "log", "model"};
        for (int k = 0; k < 4; k++) {
            long lost = 0, restored = 0;
            double down = 0;
            for (int i = 0; i < r->n_events; i++) {
                const event *e = &r->events[i];
                if (e->kind != MB_SLOG_FAULT || strcmp(e->a, sources[k]))
                    continue;
                lost += !strcmp(e->state, "lost");
                if (!strcmp(e->state, "restored")) {
                    restored++;
                    if (isfinite(e->duration_s))
                        down += e->duration_s;
                }
            }
            if (lost || restored)
                fprintf(out, "  %-7s lost %ld time(s), restored %ld, %.1f s down in total%s\n",
                        sources[k], lost, restored, down,
                        lost > restored ? " (still lost at the end)" : "");
        }
        for (int i = 0; i < r->n_events; i++) {
            const event *e = &r->events[i];
            if (e->kind != MB_SLOG_FAULT)
                continue;
            fprintf(out, "  %s  %-7s %-9s", e->time, e->a, e->state);
            if (isfinite(e->duration_s))
                fprintf(out, " after %.1f s", e->duration_s);
            fprintf(out, "  %s\n", e->b);
        }
    }
    int nd = 0;
    for (int i = 0; i < r->n_events; i++)
        nd += r->events[i].kind == MB_SLOG_DRIFT;
    if (nd) {
        fprintf(out, "\ndrift warnings: %ld signal(s)\n", r->drift_signals);
        for (int i = 0; i < r->n_events; i++) {
            const event *e = &r->events[i];
            if (e->kind != MB_SLOG_DRIFT)
                continue;
            fprintf(out, "  %s  %-14s %-8s %-4s ewma %.6f limits [%.6f, %.6f]",
                    e->time, e->a, e->state, e->direction, e->value, e->lo,
                    e->hi);
            if (!strcmp(e->state, "signal"))
                fprintf(out, " since seq %u (%s, %ld parts)", e->since_seq,
                        e->since_time, e->parts_since);
            fprintf(out, " at part %ld\n", e->ordinal);
        }
    }
    int nm = 0;
    for (int i = 0; i < r->n_events; i++)
        nm += r->events[i].kind == MB_SLOG_MODEL;
    if (nm) {
        fprintf(out, "\nmodel events\n");
        for (int i = 0; i < r->n_events; i++) {
            const event *e = &r->events[i];
            if (e->kind == MB_SLOG_MODEL)
                fprintf(out, "  %s  %s: %s\n", e->time, e->a, e->b);
        }
    }
}

/* ---- HTML ------------------------------------------------------------- */

static void note_html(void *ctx, const char *fmt, ...)
{
    FILE *f = ctx;
    char buf[1024];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    fputs("<li>", f);
    mb_html_escape(f, buf);
    fputs("</li>\n", f);
}

static int emit_svg(FILE *f, mb_svg *s)
{
    const char *txt;
    int rc = mb_svg_finish(s, &txt);
    if (!rc)
        fputs(txt, f);
    mb_svg_close(s);
    return rc;
}

static double nice_step(double range, int ticks)
{
    double raw = range / ticks;
    double p = pow(10.0, floor(log10(raw)));
    double m = raw / p;
    return (m < 1.5 ? 1 : m < 3.5 ? 2 : m < 7.5 ? 5 : 10) * p;
}

static void y_axis(mb_svg *s, double x, double y0, double h, double lo,
                   double hi, const char *fmt, double width)
{
    double step = nice_step(hi - lo, 5);
    for (double v = ceil(lo / step) * step; v <= hi + 1e-9 * step; v += step) {
        double y = y0 + h - (v - lo) / (hi - lo) * h;
        char lab[32];
        snprintf(lab, sizeof lab, fmt, fabs(v) < 1e-12 * step ? 0.0 : v);
        mb_svg_line(s, x, y, x + width, y, C_GRID, 0.6, NULL);
        mb_svg_text(s, x - 4, y + 4, 10, "end", C_INK, lab);
    }
}

static int pareto_svg(FILE *f, const mb_report *r)
{
    reason_count rs[MAX_REASONS];
    int n = sorted_reasons(r, rs);
    long total = r->rejects + r->faults;
    int shown = n < 12 ? n : 12;
    mb_svg *s;
    double W = 760, H = 280, L = 60, T = 20, PW = 640, PH = 200;
    if (mb_svg_open(W, H, &s))
        return MB_ENOMEM;
    double maxc = shown ? (double)rs[0].count : 1;
    y_axis(s, L, T, PH, 0, maxc, "%.0f", PW);
    double bw = PW / (shown ? shown : 1);
    double cum = 0, prev[2] = {0, 0};
    for (int i = 0; i < shown; i++) {
        double h = rs[i].count / maxc * PH;
        mb_svg_rect(s, L + i * bw + bw * 0.15, T + PH - h, bw * 0.7, h, C_BAR,
                    NULL);
        mb_svg_text(s, L + (i + 0.5) * bw, T + PH + 14, 10, "middle", C_INK,
                    rs[i].name);
        cum += rs[i].count;
        double cx = L + (i + 0.5) * bw, cy = T + PH - cum / total * PH;
        if (i)
            mb_svg_line(s, prev[0], prev[1], cx, cy, C_CUM, 2, NULL);
        mb_svg_circle(s, cx, cy, 3.5, C_CUM, NULL);
        prev[0] = cx;
        prev[1] = cy;
    }
    for (int p = 0; p <= 100; p += 25) {
        char lab[16];
        snprintf(lab, sizeof lab, "%d%%", p);
        mb_svg_text(s, L + PW + 6, T + PH - p / 100.0 * PH + 4, 10, "start",
                    C_CUM, lab);
    }
    mb_svg_text(s, L, T - 6, 11, "start", C_INK, "count");
    mb_svg_text(s, L + PW, T - 6, 11, "end", C_CUM, "cumulative percent");
    return emit_svg(f, s);
}

static int hours_svg(FILE *f, const mb_report *r)
{
    long h0 = r->hours[0].hour, h1 = r->hours[r->n_hours - 1].hour;
    long nh = h1 - h0 + 1;
    double W = 1100, H = 240, L = 60, T = 20, PW = 1010, PH = 170;
    mb_svg *s;
    if (mb_svg_open(W, H, &s))
        return MB_ENOMEM;
    long maxr = 1;
    for (int i = 0; i < r->n_hours; i++)
        if (r->hours[i].rejects > maxr)
            maxr = r->hours[i].rejects;
    y_axis(s, L, T, PH, 0, (double)maxr, "%.0f", PW);
    double bw = PW / (double)nh;
    long every = nh <= 24 ? 1 : nh <= 72 ? 6 : 24;
    for (int i = 0; i < r->n_hours; i++) {
        double x = L + (double)(r->hours[i].hour - h0) * bw;
        double h = (double)r->hours[i].rejects / (double)maxr * PH;
        mb_svg_rect(s, x + bw * 0.1, T + PH - h, bw * 0.8, h, C_REJ, NULL);
    }
    for (long k = 0; k < nh; k += every) {
        char lab[32];
        hour_label(h0 + k, lab, sizeof lab);
        mb_svg_text(s, L + (k + 0.5) * bw, T + PH + 14, 9, "middle", C_INK,
                    every >= 24 ? lab : lab + 11);
    }
    mb_svg_text(s, L, T - 6, 11, "start", C_INK, "rejects per hour (local time)");
    return emit_svg(f, s);
}

/* A run chart of series si; lines at lsl/usl/nominal when finite; drift
   events of chart `chart` marked. */
static int run_svg(FILE *f, const mb_report *r, int si, const char *title,
                   const char *chart, double lsl, double usl, double nominal)
{
    const bin *b = r->series[si];
    int nb = (int)((r->parts + r->binw - 1) / r->binw);
    if (nb > MB_REPORT_BINS)
        nb = MB_REPORT_BINS;
    double lo = INFINITY, hi = -INFINITY;
    for (int i = 0; i < nb; i++)
        if (b[i].n) {
            lo = fmin(lo, b[i].min);
            hi = fmax(hi, b[i].max);
        }
    if (!isfinite(lo))
        return 0;
    if (isfinite(lsl))
        lo = fmin(lo, lsl);
    if (isfinite(usl))
        hi = fmax(hi, usl);
    for (int i = 0; i < r->n_events; i++) {
        const event *e = &r->events[i];
        if (e->kind == MB_SLOG_DRIFT && !strcmp(e->a, chart) &&
            isfinite(e->lo) && isfinite(e->hi)) {
            lo = fmin(lo, e->lo);
            hi = fmax(hi, e->hi);
        }
    }
    double pad = (hi - lo) * 0.08 + 1e-9;
    lo -= pad;
    hi += pad;
    double W = 1100, H = 230, L = 70, T = 22, PW = 1000, PH = 170;
    mb_svg *s;
    if (mb_svg_open(W, H, &s))
        return MB_ENOMEM;
    y_axis(s, L, T, PH, lo, hi, hi - lo < 0.05 ? "%.4f" : hi - lo < 5 ? "%.3f" : "%.1f", PW);
    double nparts = (double)(r->parts ? r->parts : 1);
#define XO(ord) (L + (double)(ord) / nparts * PW)
#define YV(v) (T + PH - ((v) - lo) / (hi - lo) * PH)
    /* drift excursions: shade from where it began to the signal */
    for (int i = 0; i < r->n_events; i++) {
        const event *e = &r->events[i];
        if (e->kind != MB_SLOG_DRIFT || strcmp(e->a, chart))
            continue;
        double x = XO(e->ordinal);
        if (!strcmp(e->state, "signal")) {
            double x0 = e->parts_since > 0 ? XO(e->ordinal - e->parts_since) : x;
            mb_svg_rect(s, x0, T, fmax(x - x0, 1), PH, "#fbe3bd", NULL);
            mb_svg_line(s, x, T, x, T + PH, C_DRIFT, 1.5, "5,3");
            mb_svg_text(s, x + 3, T + 10, 10, "start", C_DRIFT,
                        !strcmp(e->direction, "down") ? "drift down" : "drift up");
        } else {
            mb_svg_line(s, x, T, x, T + PH, "#7f8c8d", 1, "2,3");
        }
    }
    if (nb > 0 && r->binw > 1) {
        double *band = malloc(sizeof(double) * 4 * (size_t)nb);
        if (band) {
            int k = 0;
            for (int i = 0; i < nb; i++)
                if (b[i].n) {
                    band[2 * k] = XO((i + 0.5) * r->binw);
                    band[2 * k + 1] = YV(b[i].max);
                    k++;
                }
            for (int i = nb - 1; i >= 0; i--)
                if (b[i].n) {
                    band[2 * k] = XO((i + 0.5) * r->binw);
                    band[2 * k + 1] = YV(b[i].min);
                    k++;
                }
            mb_svg_polyline(s, band, k, 1, "none", 0, C_BAND, NULL);
            free(band);
        }
    }
    double *xy = malloc(sizeof(double) * 2 * (size_t)(nb > 0 ? nb : 1));
    if (xy) {
        int k = 0;
        for (int i = 0; i < nb; i++)
            if (b[i].n) {
                xy[2 * k] = XO((i + 0.5) * r->binw);
                xy[2 * k + 1] = YV(b[i].sum / (double)b[i].n);
                k++;
            }
        mb_svg_polyline(s, xy, k, 0, C_LINE, 1.2, "none", NULL);
        free(xy);
    }
    if (isfinite(lsl))
        mb_svg_line(s, L, YV(lsl), L + PW, YV(lsl), C_LIMIT, 1.5, "6,3");
    if (isfinite(usl))
        mb_svg_line(s, L, YV(usl), L + PW, YV(usl), C_LIMIT, 1.5, "6,3");
    if (isfinite(nominal))
        mb_svg_line(s, L, YV(nominal), L + PW, YV(nominal), "#95a5a6", 1, "1,3");
    for (int i = 0; i < nb; i++)
        if (b[i].rejects)
            mb_svg_circle(s, XO((i + 0.5) * r->binw), YV(b[i].rej_val), 2.6,
                          C_REJ, NULL);
#undef XO
#undef YV
    char sub[160];
    snprintf(sub, sizeof sub, "%s  (%ld parts%s; red: rejects%s)", title,
             r->parts, r->binw > 1 ? ", band: min-max per bin" : "",
             isfinite(lsl) ? "; dashed: tolerance" : "");
    mb_svg_text(s, L, T - 7, 11, "start", C_INK, sub);
    mb_svg_text(s, L + PW, T + PH + 14, 10, "end", C_INK, "part sequence");
    return emit_svg(f, s);
}

static int polar_svg(FILE *f, const mb_report *r)
{
    double W = 420, H = 420, cx = 210, cy = 205, R = 170, r0 = 40;
    int no = 0;
    long maxc = 1;
    for (int o = 0; o < MAX_OUTLINES; o++)
        for (int b = 0; b < POLAR_BINS; b++)
            if (r->polar[o][b]) {
                no = o + 1 > no ? o + 1 : no;
                maxc = r->polar[o][b] > maxc ? r->polar[o][b] : maxc;
            }
    if (no == 0)
        return 0;
    mb_svg *s;
    if (mb_svg_open(W, H, &s))
        return MB_ENOMEM;
    double ring = (R - r0) / no;
    for (int o = 0; o < no; o++) {
        /* outline 0 outermost */
        double ro = R - o * ring, ri = ro - ring * 0.9;
        mb_svg_circle(s, cx, cy, ro, "none", C_GRID);
        for (int b = 0; b < POLAR_BINS; b++) {
            long c = r->polar[o][b];
            if (!c)
                continue;
            double xy[24];
            int k = 0;
            for (int j = 0; j <= 5; j++, k++) {
                double a = (b * 10.0 + j * 2.0) * M_PI / 180.0;
                xy[2 * k] = cx + ro * cos(a);
                xy[2 * k + 1] = cy - ro * sin(a);
            }
            for (int j = 5; j >= 0; j--, k++) {
                double a = (b * 10.0 + j * 2.0) * M_PI / 180.0;
                xy[2 * k] = cx + ri * cos(a);
                xy[2 * k + 1] = cy - ri * sin(a);
            }
            double t = (double)c / (double)maxc;
            char fill[16];
            snprintf(fill, sizeof fill, "#%02x%02x%02x", (int)(250 - 58 * t),
                     (int)(235 - 178 * t), (int)(220 - 177 * t));
            mb_svg_polyline(s, xy, k, 1, "#ffffff", 0.5, fill, NULL);
        }
        char lab[24];
        snprintf(lab, sizeof lab, "outline %d", o);
        mb_svg_text(s, cx + 3, cy - ro + ring * 0.5 + 4, 9, "start", C_INK, lab);
    }
    for (int a = 0; a < 360; a += 90) {
        double rad = a * M_PI / 180.0;
        char lab[16];
        snprintf(lab, sizeof lab, "%d\xc2\xb0", a);
        mb_svg_line(s, cx + r0 * cos(rad), cy - r0 * sin(rad),
                    cx + (R + 4) * cos(rad), cy - (R + 4) * sin(rad), "#aab4be",
                    0.6, "2,2");
        mb_svg_text(s, cx + (R + 18) * cos(rad), cy - (R + 18) * sin(rad) + 4, 10,
                    "middle", C_INK, lab);
    }
    char lab[64];
    snprintf(lab, sizeof lab, "darkest: %ld defects in 10\xc2\xb0", maxc);
    mb_svg_text(s, 8, H - 6, 10, "start", C_INK, lab);
    return emit_svg(f, s);
}

/* PNG into memory through libpng. */
typedef struct {
    unsigned char *p;
    size_t n, cap;
    int fail;
} membuf;

static void png_mem_write(png_structp png, png_bytep data, png_size_t len)
{
    membuf *m = png_get_io_ptr(png);
    if (m->fail)
        return;
    if (m->n + len > m->cap) {
        size_t cap = 2 * (m->n + len);
        unsigned char *q = realloc(m->p, cap);
        if (!q) {
            m->fail = 1;
            return;
        }
        m->p = q;
        m->cap = cap;
    }
    memcpy(m->p + m->n, data, len);
    m->n += len;
}

static void png_mem_flush(png_structp png)
{
    (void)png;
}

static int encode_png(const uint8_t *pix, int w, int h, membuf *m)
{
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, NULL, NULL);
    if (!png)
        return MB_ENOMEM;
    png_infop info = png_create_info_struct(png);
    if (!info || setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, info ? &info : NULL);
        return MB_ENOMEM;
    }
    png_set_write_fn(png, m, png_mem_write, png_mem_flush);
    png_set_IHDR(png, info, (png_uint_32)w, (png_uint_32)h, 8, PNG_COLOR_TYPE_GRAY,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT,
                 PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    for (int y = 0; y < h; y++)
        png_write_row(png, (png_const_bytep)(pix + (size_t)y * (size_t)w));
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    return m->fail ? MB_ENOMEM : 0;
}

static void base64(FILE *f, const unsigned char *p, size_t n)
{
    static const char tab[] =
        "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    for (size_t i = 0; i < n; i += 3) {
        unsigned v = (unsigned)p[i] << 16;
        if (i + 1 < n)
            v |= (unsigned)p[i + 1] << 8;
        if (i + 2 < n)
            v |= p[i + 2];
        fputc(tab[v >> 18 & 63], f);
        fputc(tab[v >> 12 & 63], f);
        fputc(i + 1 < n ? tab[v >> 6 & 63] : '=', f);
        fputc(i + 2 < n ? tab[v & 63] : '=', f);
    }
}

/* A thumbnail no larger than 160 px, box-averaged, as a data: URI. */
static int thumb_img(FILE *f, const char *path)
{
    mb_image img;
    if (mb_image_load(path, &img, NULL))
        return -1;
    int k = 1;
    while (img.width / k > 160 || img.height / k > 160)
        k++;
    int w = img.width / k, h = img.height / k;
    uint8_t *small = malloc((size_t)(w > 0 ? w : 1) * (size_t)(h > 0 ? h : 1));
    int rc = -1;
    membuf m = {0};
    if (!small || w < 1 || h < 1)
        goto out;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            unsigned sum = 0;
            for (int j = 0; j < k; j++)
                for (int i = 0; i < k; i++)
                    sum += img.pixels[(size_t)(y * k + j) * (size_t)img.stride +
                                      (size_t)(x * k + i)];
            small[(size_t)y * (size_t)w + (size_t)x] =
                (uint8_t)((sum + (unsigned)(k * k) / 2) / (unsigned)(k * k));
        }
    if (encode_png(small, w, h, &m))
        goto out;
    fprintf(f, "<img width=\"%d\" height=\"%d\" alt=\"reject image\" src=\"data:image/png;base64,", w, h);
    base64(f, m.p, m.n);
    fputs("\">", f);
    rc = 0;
out:
    free(m.p);
    free(small);
    mb_image_free(&img);
    return rc;
}

static const char *const css =
    "body{font-family:sans-serif;color:" C_INK ";margin:24px;max-width:1140px}"
    "h1{font-size:22px;margin-bottom:4px}h2{font-size:17px;margin-top:28px;"
    "border-bottom:1px solid " C_GRID ";padding-bottom:3px}"
    ".tiles{display:flex;gap:12px;flex-wrap:wrap}.tile{background:#eef3f6;"
    "padding:10px 16px;border-radius:6px;min-width:110px}.tile b{display:block;"
    "font-size:24px}table{border-collapse:collapse;font-size:13px}"
    "td,th{border:1px solid " C_GRID ";padding:3px 8px;text-align:right}"
    "th{background:#eef3f6}td.l,th.l{text-align:left}.notes li{color:#8a4b00}"
    ".thumbs{display:flex;flex-wrap:wrap;gap:10px}.thumb{width:170px;"
    "font-size:11px;border:1px solid " C_GRID ";padding:4px}"
    "details{margin-top:6px}svg{display:block;margin:6px 0}";

static void th_row(FILE *f, int n, ...)
{
    va_list ap;
    va_start(ap, n);
    fputs("<tr>", f);
    for (int i = 0; i < n; i++)
        fprintf(f, "<th%s>%s</th>", i == 0 ? " class=\"l\"" : "",
                va_arg(ap, const char *));
    fputs("</tr>\n", f);
    va_end(ap);
}

static void td_text(FILE *f, const char *s, int left)
{
    fputs(left ? "<td class=\"l\">" : "<td>", f);
    mb_html_escape(f, s);
    fputs("</td>", f);
}

int mb_report_write_html(const mb_report *r, const char *path,
                         const char *image_root, const char *title, char *err)
{
    char tmp[4096];
    snprintf(tmp, sizeof tmp, "%s.tmp", path);
    FILE *f = fopen(tmp, "w");
    if (!f)
        return mb_err_set(err, MB_EIO, "%s: cannot write: %s", tmp,
                          strerror(errno));
    int rc = 0;
    mb_report_totals t;
    mb_report_totals_get(r, &t);
    fputs("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
          "<title>",
          f);
    mb_html_escape(f, title);
    fprintf(f, "</title><style>%s</style></head><body>\n<h1>", css);
    mb_html_escape(f, title);
    fputs("</h1>\n<p>", f);
    if (r->time_first[0]) {
        mb_html_escape(f, r->time_first);
        fputs(" &ndash; ", f);
        mb_html_escape(f, r->time_last);
    }
    fprintf(f, " &middot; %ld log file(s)", t.files);
    for (int i = 0; i < r->n_shifts; i++) {
        fputs(i ? ", " : " &middot; shifts: ", f);
        mb_html_escape(f, r->shifts[i]);
    }
    fputs("</p>\n<div class=\"tiles\">", f);
    fprintf(f, "<div class=\"tile\">parts<b>%ld</b></div>", t.parts);
    fprintf(f, "<div class=\"tile\">passes<b>%ld</b></div>", t.passes);
    fprintf(f, "<div class=\"tile\">rejects<b>%ld</b></div>", t.rejects);
    fprintf(f, "<div class=\"tile\">faults<b>%ld</b></div>", t.faults);
    if (t.parts)
        fprintf(f, "<div class=\"tile\">yield<b>%.2f %%</b></div>", 100 * t.yield);
    else
        fputs("<div class=\"tile\">yield<b>&ndash;</b></div>", f);
    fprintf(f, "<div class=\"tile\">drift warnings<b>%ld</b></div>",
            t.drift_signals);
    fputs("</div>\n<ul class=\"notes\">", f);
    notes(r, note_html, f);
    fputs("</ul>\n", f);

    if (r->n_reasons) {
        fputs("<h2>Why parts were rejected (Pareto)</h2>\n", f);
        if ((rc = pareto_svg(f, r)))
            goto out;
        reason_count rs[MAX_REASONS];
        int n = sorted_reasons(r, rs);
        long total = r->rejects + r->faults, cum = 0;
        fputs("<details><summary>numbers</summary><table>", f);
        th_row(f, 4, "reason", "count", "percent", "cumulative");
        for (int i = 0; i < n; i++) {
            cum += rs[i].count;
            fputs("<tr>", f);
            td_text(f, rs[i].name, 1);
            fprintf(f, "<td>%ld</td><td>%.2f %%</td><td>%.2f %%</td></tr>\n",
                    rs[i].count, 100.0 * rs[i].count / (double)total,
                    100.0 * cum / (double)total);
        }
        fputs("</table></details>\n", f);
    }
    if (r->n_hours) {
        fputs("<h2>Rejects per hour</h2>\n", f);
        if ((rc = hours_svg(f, r)))
            goto out;
    }
    if (r->located_total) {
        fputs("<h2>Where the defects sit on the part</h2>\n<p>Located defects "
              "by angle about the part's origin (0&deg; to the right, angles "
              "counter-clockwise as drawn), one ring per outline (outline 0 "
              "outside); darker is more.</p>\n",
              f);
        if ((rc = polar_svg(f, r)))
            goto out;
    }
    if (r->parts) {
        fputs("<h2>Run charts</h2>\n", f);
        if ((rc = run_svg(f, r, 0, "T\xc2\xb2 of the shape modes", "t2", NAN,
                          NAN, NAN)))
            goto out;
        if ((rc = run_svg(f, r, 1, "size (mm)", "size", NAN, NAN, NAN)))
            goto out;
        for (int i = 0; i < r->n_gauges; i++) {
            mb_report_gauge g;
            gauge_result(&r->gauges[i], &g);
            char title2[128], chart[96];
            snprintf(title2, sizeof title2, "gauge %s (mm)", g.name);
            snprintf(chart, sizeof chart, "gauge:%s", g.name);
            if ((rc = run_svg(f, r, N_FIXED_SERIES + i, title2, chart, g.lsl,
                              g.usl, g.nominal)))
                goto out;
        }
    }
    if (r->n_gauges) {
        fputs("<h2>Gauge capability</h2>\n<table>", f);
        th_row(f, 9, "gauge", "n", "mean", "sd", "LSL", "USL", "Cp", "Cpk",
               "out of tolerance");
        for (int i = 0; i < r->n_gauges; i++) {
            mb_report_gauge g;
            gauge_result(&r->gauges[i], &g);
            char v[6][32];
            fmt_num(v[0], 32, g.mean, "%.5f");
            fmt_num(v[1], 32, g.sd, "%.6f");
            fmt_num(v[2], 32, g.lsl, "%.4f");
            fmt_num(v[3], 32, g.usl, "%.4f");
            fmt_num(v[4], 32, g.cp, "%.3f");
            fmt_num(v[5], 32, g.cpk, "%.3f");
            fputs("<tr>", f);
            td_text(f, g.name, 1);
            fprintf(f, "<td>%ld</td>", g.n);
            for (int k = 0; k < 6; k++)
                td_text(f, v[k], 0);
            fprintf(f, "<td>%ld</td></tr>\n", g.out_of_tol);
        }
        fputs("</table>\n<p>Cp = (USL &minus; LSL) / 6s, Cpk = min(USL &minus; "
              "mean, mean &minus; LSL) / 3s.</p>\n",
              f);
    }
    int nev = 0;
    for (int i = 0; i < r->n_events; i++)
        nev += r->events[i].kind != MB_SLOG_OTHER;
    if (nev) {
        fputs("<h2>Drift warnings, faults and model changes</h2>\n<table>", f);
        th_row(f, 5, "time", "what", "", "state", "detail");
        for (int i = 0; i < r->n_events; i++) {
            const event *e = &r->events[i];
            char detail[512];
            const char *what = e->kind == MB_SLOG_DRIFT   ? "drift"
                               : e->kind == MB_SLOG_FAULT ? "fault"
                                                          : "model";
            if (e->kind == MB_SLOG_DRIFT && strcmp(e->state, "signal"))
                snprintf(detail, sizeof detail, "EWMA %.5f, limits %.5f .. %.5f",
                         e->value, e->lo, e->hi);
            else if (e->kind == MB_SLOG_DRIFT)
                snprintf(detail, sizeof detail,
                         "%s; EWMA %.5f, limits %.5f .. %.5f; began %s (seq %u, "
                         "%ld parts before)",
                         e->direction, e->value, e->lo, e->hi, e->since_time,
                         e->since_seq, e->parts_since);
            else if (e->kind == MB_SLOG_FAULT && isfinite(e->duration_s))
                snprintf(detail, sizeof detail, "%s (code %d); lasted %.1f s",
                         e->b, e->code, e->duration_s);
            else if (e->kind == MB_SLOG_FAULT)
                snprintf(detail, sizeof detail, "%s (code %d)", e->b, e->code);
            else
                snprintf(detail, sizeof detail, "%s", e->b);
            fputs("<tr>", f);
            td_text(f, e->time, 1);
            td_text(f, what, 1);
            td_text(f, e->a, 1);
            td_text(f, e->state, 1);
            td_text(f, detail, 1);
            fputs("</tr>\n", f);
        }
        fputs("</table>\n", f);
    }
    if (r->n_thumbs) {
        fprintf(f, "<h2>Reject images (%d of %ld)</h2>\n<div class=\"thumbs\">",
                r->n_thumbs, r->rejects_with_image);
        for (int i = 0; i < r->n_thumbs; i++) {
            const thumb *th = &r->thumbs[i];
            char p[4096];
            /* absolute paths as logged; relative ones from the log
               folder's parent (io/shiftlog_format.h) */
            if (th->image[0] == '/')
                snprintf(p, sizeof p, "%s", th->image);
            else
                snprintf(p, sizeof p, "%s/%s", image_root ? image_root : ".",
                         th->image);
            fputs("<div class=\"thumb\">", f);
            if (thumb_img(f, p)) {
                fputs("<i>image not readable: ", f);
                mb_html_escape(f, th->image);
                fputs("</i>", f);
            }
            fputs("<br><b>", f);
            mb_html_escape(f, th->reason);
            fputs("</b> ", f);
            mb_html_escape(f, th->text);
            fputs("<br>", f);
            mb_html_escape(f, th->time);
            fprintf(f, " &middot; seq %u</div>\n", th->seq);
        }
        fputs("</div>\n", f);
    }
    fputs("<p style=\"margin-top:30px;font-size:11px\">modeband shift report. "
          "modeband is a quality-inspection tool, not a safety device.</p>\n"
          "</body></html>\n",
          f);
out:
    if (fclose(f) && !rc)
        rc = MB_EIO;
    if (rc) {
        remove(tmp);
        return mb_err_set(err, rc, "%s: cannot write the report (%s)", path,
                          mb_strerror(rc));
    }
    if (rename(tmp, path)) {
        remove(tmp);
        return mb_err_set(err, MB_EIO, "%s: cannot write: %s", path,
                          strerror(errno));
    }
    return 0;
}
