/*
 * io/shiftlog.c - the per-shift log writer (behaviour in shiftlog.h, the
 * record layout in shiftlog_format.h).
 *
 * Why one write(2) per line on an O_APPEND descriptor: POSIX appends each
 * write at the end of the file as one operation, so after a crash the file
 * holds every record written before it whole, and at most the record in
 * flight is missing or cut short. A cut record is the "torn last line"
 * readers skip; the writer, finding the file not ending in '\n' on open,
 * puts a '\n' in front of its next record (in the same write) so that the
 * torn text stays a line of its own.
 *
 * Records are formatted by hand with snprintf into one buffer made at open,
 * in a fixed member order (format, version, kind, time, then the kind's
 * members); the order lets a restart rebuild the shift's counts with a
 * substring scan instead of a JSON parse of a possibly large file.
 */
#include "shiftlog.h"

#include "error.h"

#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#define LOG_PATH_LEN 1024
#define LINE_CAP (32 * 1024) /* a part record stays under ~20 KiB, see below */
#define NAME_LEN 32
#define OPEN_RETRY_MS 1000

struct mb_shiftlog {
    char folder[LOG_PATH_LEN];
    char station[128];
    mb_shift_calendar cal;
    int flush_s, retention_days;
    int slot;
    char model[LOG_PATH_LEN];
    char checksum[80];

    int fd;
    int have_shift;
    mb_shift_now shift;
    char path[LOG_PATH_LEN + 64];
    int need_newline;  /* the file ends in a torn line */
    int dirty;         /* written since the last fdatasync */
    int64_t last_sync_ms;
    int64_t next_open_ms; /* earliest retry of a failed open */

    mb_shiftlog_counts counts;
    char reason_names[MB_SHIFTLOG_CODES][NAME_LEN];
    mb_shiftlog_stats stats;
    int64_t problem_since_ms;
    uint64_t lost_at_problem;

    char *buf; /* LINE_CAP + 1: buf[0] holds a '\n' for a torn line */
    char summary[512];
};

int64_t mb_shiftlog_now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

/* ---- formatting into the line buffer ---- */

typedef struct {
    char *p;
    size_t cap, len;
    int over;
} out_t;

static void put(out_t *o, const char *s)
{
    size_t n = strlen(s);
    if (o->over || o->len + n >= o->cap) {
        o->over = 1;
        return;
    }
    memcpy(o->p + o->len, s, n);
    o->len += n;
}

static void putf(out_t *o, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;
static void putf(out_t *o, const char *fmt, ...)
{
    if (o->over)
        return;
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(o->p + o->len, o->cap - o->len, fmt, ap);
    va_end(ap);
    if (n < 0 || (size_t)n >= o->cap - o->len) {
        o->over = 1;
        return;
    }
    o->len += (size_t)n;
}

/* A number, or null when not finite. 9 significant digits keep every
   figure of a measurement while keeping lines short. */
static void put_num(out_t *o, double v)
{
    if (isfinite(v))
        putf(o, "%.9g", v);
    else
        put(o, "null");
}

/* A JSON string (or null for NULL when nullable, else ""), escaped, at
   most MB_SHIFTLOG_TEXT_MAX input bytes, never cut inside a UTF-8
   sequence. */
static void put_str(out_t *o, const char *s, int nullable)
{
    if (!s) {
        put(o, nullable ? "null" : "\"\"");
        return;
    }
    if (o->over || o->len + 2 >= o->cap) {
        o->over = 1;
        return;
    }
    o->p[o->len++] = '"';
    size_t i = 0;
    for (; s[i] && i < MB_SHIFTLOG_TEXT_MAX; i++) {
        unsigned char c = (unsigned char)s[i];
        if (c >= 0xC0) { /* a lead byte: keep its sequence whole or stop */
            size_t need = c >= 0xF0 ? 4 : c >= 0xE0 ? 3 : 2;
            if (i + need > MB_SHIFTLOG_TEXT_MAX)
                break;
        }
        char esc[8];
        const char *e = NULL;
        if (c == '"')
            e = "\\\"";
        else if (c == '\\')
            e = "\\\\";
        else if (c == '\n')
            e = "\\n";
        else if (c == '\t')
            e = "\\t";
        else if (c == '\r')
            e = "\\r";
        else if (c < 0x20 || c == 0x7F) {
            snprintf(esc, sizeof esc, "\\u%04x", c);
            e = esc;
        }
        if (e) {
            put(o, e);
        } else if (o->len + 1 < o->cap) {
            o->p[o->len++] = (char)c;
        } else {
            o->over = 1;
        }
        if (o->over)
            return;
    }
    put(o, "\"");
}

/* ,"key": */
static void put_key(out_t *o, const char *key)
{
    putf(o, ",\"%s\":", key);
}

/* Local time with offset and ms, e.g. "2026-12-01T06:00:00.125+01:00". */
static void put_time(out_t *o, int64_t ms)
{
    int64_t sec = ms >= 0 ? ms / 1000 : -((-ms + 999) / 1000);
    int milli = (int)(ms - sec * 1000);
    time_t t = (time_t)sec;
    struct tm tm;
    if (!localtime_r(&t, &tm)) {
        put(o, "null");
        return;
    }
    long off = tm.tm_gmtoff;
    char sign = off < 0 ? '-' : '+';
    if (off < 0)
        off = -off;
    putf(o, "\"%04d-%02d-%02dT%02d:%02d:%02d.%03d%c%02ld:%02ld\"",
         tm.tm_year + 1900, tm.tm_mon + 1, tm.tm_mday, tm.tm_hour, tm.tm_min,
         tm.tm_sec, milli, sign, off / 3600, (off / 60) % 60);
}

static void begin(out_t *o, mb_shiftlog *log, const char *kind, int64_t ms)
{
    o->p = log->buf + 1;
    o->cap = LINE_CAP;
    o->len = 0;
    o->over = 0;
    putf(o, "{\"format\":\"%s\",\"version\":%d,\"kind\":\"%s\",\"time\":",
         MB_SHIFTLOG_FORMAT, MB_SHIFTLOG_VERSION, kind);
    put_time(o, ms);
}

/* ---- the file ---- */

static void set_problem(mb_shiftlog *log, int64_t now_ms, int errnum)
{
    if (!log->stats.problem) {
        log->stats.problem = 1;
        log->problem_since_ms = now_ms;
        log->lost_at_problem = log->stats.lost;
    }
    log->stats.last_error = errnum;
}

static int emit(mb_shiftlog *log, int64_t now_ms, out_t *o, char *err);

/* After a success while the problem flag was up: say so in the log. */
static void announce_restored(mb_shiftlog *log, int64_t now_ms)
{
    uint64_t lost = log->stats.lost - log->lost_at_problem;
    double dur = (double)(now_ms - log->problem_since_ms) / 1000.0;
    int code = log->stats.last_error;
    log->stats.problem = 0;
    log->stats.last_error = 0;
    char text[160];
    snprintf(text, sizeof text,
             "logging works again; %llu records were lost",
             (unsigned long long)lost);
    out_t o;
    begin(&o, log, "fault", now_ms);
    put(&o, ",\"source\":\"log\",\"state\":\"restored\"");
    putf(&o, ",\"code\":%d", code);
    put_key(&o, "text");
    put_str(&o, text, 0);
    put_key(&o, "duration_s");
    put_num(&o, dur);
    put(&o, "}\n");
    emit(log, now_ms, &o, NULL);
}

static int do_sync(mb_shiftlog *log, int64_t now_ms)
{
    if (log->fd < 0)
        return MB_OK;
    log->last_sync_ms = now_ms;
    if (!log->dirty)
        return MB_OK;
    log->stats.syncs++;
    if (fdatasync(log->fd) != 0) {
        set_problem(log, now_ms, errno);
        return MB_EIO;
    }
    log->dirty = 0;
    return MB_OK;
}

/* Write the formatted line o (o->p is log->buf + 1) with one write(2). */
static int emit(mb_shiftlog *log, int64_t now_ms, out_t *o, char *err)
{
    if (o->over) {
        /* Cannot happen with the caps of shiftlog.h; count it honestly. */
        set_problem(log, now_ms, ENOBUFS);
        log->stats.lost++;
        return mb_err_set(err, MB_EIO, "%s: a record did not fit %d bytes",
                          log->path, LINE_CAP);
    }
    if (log->fd < 0) {
        if (!log->stats.problem)
            set_problem(log, now_ms, ENOENT);
        log->stats.lost++;
        return mb_err_set(err, MB_EIO, "%s: log file not open; record lost",
                          log->path[0] ? log->path : log->folder);
    }
    const char *p = o->p;
    size_t n = o->len;
    int prefixed = 0;
    if (log->need_newline) {
        log->buf[0] = '\n';
        p = log->buf;
        n++;
        prefixed = 1;
    }
    size_t done = 0;
    int tries = 0, errnum = 0;
    while (done < n && tries < 3) {
        ssize_t w = write(log->fd, p + done, n - done);
        tries++;
        if (w > 0) {
            done += (size_t)w;
            continue;
        }
        errnum = w < 0 ? errno : ENOSPC;
        if (errnum != EINTR)
            break;
    }
    if (prefixed && done >= 1)
        log->need_newline = 0;
    if (done > (size_t)prefixed)
        log->dirty = 1;
    if (done < n) {
        /* Part of the line may be in the file: the next record starts a
           fresh line. */
        if (done > (size_t)prefixed)
            log->need_newline = 1;
        set_problem(log, now_ms, errnum ? errnum : EIO);
        log->stats.lost++;
        return mb_err_set(err, MB_EIO, "%s: writing a record failed: %s",
                          log->path, strerror(errnum ? errnum : EIO));
    }
    log->stats.records++;
    if (log->stats.problem)
        announce_restored(log, now_ms);
    if (log->flush_s == 0 ||
        now_ms - log->last_sync_ms >= (int64_t)log->flush_s * 1000)
        do_sync(log, now_ms);
    return MB_OK;
}

/* ---- counts ---- */

static void count_part(mb_shiftlog *log, int verdict, int has_reason, int code,
                       const char *name, size_t name_len)
{
    mb_shiftlog_counts *c = &log->counts;
    c->parts++;
    if (verdict == MB_SHIFTLOG_PASS)
        c->passes++;
    else if (verdict == MB_SHIFTLOG_REJECT)
        c->rejects++;
    else
        c->faults++;
    if (!has_reason || code < 0 || code >= MB_SHIFTLOG_CODES)
        return;
    c->by_code[code]++;
    if (name && name_len > 0 && log->reason_names[code][0] == '\0') {
        if (name_len >= NAME_LEN)
            name_len = NAME_LEN - 1;
        memcpy(log->reason_names[code], name, name_len);
        log->reason_names[code][name_len] = '\0';
    }
}

/* Rebuild the counts from an existing shift file; report whether it has a
   shift-start and whether it ends in a torn line. */
static void scan_existing(mb_shiftlog *log, int *has_start, int *torn)
{
    *has_start = 0;
    *torn = 0;
    FILE *f = fopen(log->path, "r");
    if (!f)
        return;
    static const char head[] = "{\"format\":\"" MB_SHIFTLOG_FORMAT "\"";
    char *line = NULL;
    size_t cap = 0;
    ssize_t n;
    int last_complete = 1;
    while ((n = getline(&line, &cap, f)) > 0) {
        last_complete = line[n - 1] == '\n';
        if (!last_complete || n < 3 || line[n - 2] != '}' ||
            strncmp(line, head, sizeof head - 1) != 0)
            continue;
        line[n - 1] = '\0';
        const char *k = strstr(line, "\"kind\":\"");
        if (!k)
            continue;
        k += 8;
        if (strncmp(k, "shift-start\"", 12) == 0) {
            *has_start = 1;
        } else if (strncmp(k, "drift\"", 6) == 0) {
            if (strstr(k, "\"state\":\"signal\""))
                log->counts.drift_signals++;
        } else if (strncmp(k, "part\"", 5) == 0) {
            const char *v = strstr(k, "\"verdict\":\"");
            if (!v)
                continue;
            v += 11;
            int verdict = strncmp(v, "pass\"", 5) == 0     ? MB_SHIFTLOG_PASS
                          : strncmp(v, "reject\"", 7) == 0 ? MB_SHIFTLOG_REJECT
                                                           : MB_SHIFTLOG_FAULT;
            const char *r = strstr(v, "\"reason\":");
            const char *name = NULL;
            size_t name_len = 0;
            int code = 0, has = 0;
            if (r && r[9] == '"') {
                name = r + 10;
                const char *q = strchr(name, '"');
                name_len = q ? (size_t)(q - name) : 0;
                const char *c = strstr(r, "\"code\":");
                if (c) {
                    code = atoi(c + 7);
                    has = 1;
                }
            }
            count_part(log, verdict, has, code, name, name_len);
        }
    }
    free(line);
    /* An empty file is not torn; a file whose last line lacks '\n' is. */
    *torn = !last_complete;
    fclose(f);
}

/* ---- shifts ---- */

static void write_shift_start(mb_shiftlog *log, int64_t now_ms)
{
    out_t o;
    begin(&o, log, "shift-start", now_ms);
    put_key(&o, "shift");
    put_str(&o, log->shift.name, 0);
    put_key(&o, "date");
    put_str(&o, log->shift.date, 0);
    put_key(&o, "station");
    put_str(&o, log->station, 0);
    put_key(&o, "model");
    put_str(&o, log->model[0] ? log->model : NULL, 1);
    put_key(&o, "model_checksum");
    put_str(&o, log->checksum[0] ? log->checksum : NULL, 1);
    putf(&o, ",\"slot\":%d}\n", log->slot);
    emit(log, now_ms, &o, NULL);
}

/* Codes sorted by count, most first (ties: lower code first). */
static int top_codes(const mb_shiftlog_counts *c, int *codes)
{
    int n = 0;
    for (int i = 0; i < MB_SHIFTLOG_CODES; i++)
        if (c->by_code[i] > 0)
            codes[n++] = i;
    for (int i = 1; i < n; i++) {
        int x = codes[i], j = i;
        while (j > 0 && c->by_code[codes[j - 1]] < c->by_code[x]) {
            codes[j] = codes[j - 1];
            j--;
        }
        codes[j] = x;
    }
    return n;
}

static const char *code_name(const mb_shiftlog *log, int code, char *buf,
                             size_t size)
{
    if (log->reason_names[code][0])
        return log->reason_names[code];
    snprintf(buf, size, "code-%d", code);
    return buf;
}

static void write_shift_end(mb_shiftlog *log, int64_t now_ms)
{
    const mb_shiftlog_counts *c = &log->counts;
    double yield = c->parts ? (double)c->passes / (double)c->parts : NAN;
    int codes[MB_SHIFTLOG_CODES];
    int n = top_codes(c, codes);
    char nb[NAME_LEN];
    out_t o;
    begin(&o, log, "shift-end", now_ms);
    put_key(&o, "shift");
    put_str(&o, log->shift.name, 0);
    put_key(&o, "date");
    put_str(&o, log->shift.date, 0);
    putf(&o, ",\"parts\":%llu,\"passes\":%llu,\"rejects\":%llu,\"faults\":%llu",
         (unsigned long long)c->parts, (unsigned long long)c->passes,
         (unsigned long long)c->rejects, (unsigned long long)c->faults);
    put_key(&o, "yield");
    put_num(&o, yield);
    put(&o, ",\"reasons\":{");
    for (int i = 0; i < n; i++) {
        if (i)
            put(&o, ",");
        put_str(&o, code_name(log, codes[i], nb, sizeof nb), 0);
        putf(&o, ":%llu", (unsigned long long)c->by_code[codes[i]]);
    }
    putf(&o, "},\"drift_signals\":%llu}\n",
         (unsigned long long)c->drift_signals);
    emit(log, now_ms, &o, NULL);

    /* The journal line. */
    size_t used = (size_t)snprintf(
        log->summary, sizeof log->summary,
        "shift %s %s ended: %llu parts, %llu pass, %llu reject, %llu fault",
        log->shift.name, log->shift.date, (unsigned long long)c->parts,
        (unsigned long long)c->passes, (unsigned long long)c->rejects,
        (unsigned long long)c->faults);
    if (used < sizeof log->summary && c->parts)
        used += (size_t)snprintf(log->summary + used,
                                 sizeof log->summary - used, ", yield %.2f%%",
                                 100.0 * yield);
    for (int i = 0; i < n && i < 5 && used < sizeof log->summary; i++)
        used += (size_t)snprintf(
            log->summary + used, sizeof log->summary - used, "%s%s %llu",
            i == 0 ? ", top reasons " : ", ",
            code_name(log, codes[i], nb, sizeof nb),
            (unsigned long long)c->by_code[codes[i]]);
}

/* Delete shift files dated more than retention_days before the current
   shift's date. */
static void apply_retention(mb_shiftlog *log)
{
    if (log->retention_days <= 0 || !log->have_shift)
        return;
    int y, m, d;
    if (sscanf(log->shift.date, "%4d-%2d-%2d", &y, &m, &d) != 3)
        return;
    struct tm tm = {0};
    tm.tm_year = y - 1900;
    tm.tm_mon = m - 1;
    tm.tm_mday = d - log->retention_days;
    time_t t = timegm(&tm);
    struct tm c;
    if (t == (time_t)-1 || !gmtime_r(&t, &c))
        return;
    char cutoff[16];
    snprintf(cutoff, sizeof cutoff, "%04u-%02u-%02u",
             (unsigned)(c.tm_year + 1900) % 10000u,
             (unsigned)(c.tm_mon + 1) % 100u, (unsigned)c.tm_mday % 100u);
    DIR *dir = opendir(log->folder);
    if (!dir)
        return;
    struct dirent *e;
    while ((e = readdir(dir)) != NULL) {
        const char *s = e->d_name;
        size_t len = strlen(s);
        /* YYYY-MM-DD_<name>.jsonl */
        if (len < 18 || s[4] != '-' || s[7] != '-' || s[10] != '_' ||
            strcmp(s + len - 6, ".jsonl") != 0)
            continue;
        int digits = 1;
        for (int i = 0; i < 10; i++)
            if (i != 4 && i != 7 && (s[i] < '0' || s[i] > '9'))
                digits = 0;
        if (!digits || strncmp(s, cutoff, 10) >= 0)
            continue;
        if (unlinkat(dirfd(dir), s, 0) == 0)
            log->stats.files_deleted++;
    }
    closedir(dir);
}

/* Open (or continue) the current shift's file; problem flag on failure. */
static void open_shift_file(mb_shiftlog *log, int64_t now_ms, char *err)
{
    snprintf(log->path, sizeof log->path, "%s/%s_%s.jsonl", log->folder,
             log->shift.date, log->shift.name);
    if (mkdir(log->folder, 0755) != 0 && errno != EEXIST) {
        int e = errno;
        set_problem(log, now_ms, e);
        log->next_open_ms = now_ms + OPEN_RETRY_MS;
        mb_err_set(err, MB_EIO, "%s: cannot make the log folder: %s",
                   log->folder, strerror(e));
        return;
    }
    int fd = open(log->path, O_WRONLY | O_APPEND | O_CREAT | O_CLOEXEC, 0644);
    if (fd < 0) {
        int e = errno;
        set_problem(log, now_ms, e);
        log->next_open_ms = now_ms + OPEN_RETRY_MS;
        mb_err_set(err, MB_EIO, "%s: cannot open the shift log: %s",
                   log->path, strerror(e));
        return;
    }
    log->fd = fd;
    log->dirty = 0;
    log->last_sync_ms = now_ms;
    int has_start = 0, torn = 0;
    struct stat st;
    if (fstat(fd, &st) == 0 && st.st_size > 0)
        scan_existing(log, &has_start, &torn);
    if (torn) {
        log->need_newline = 1;
        log->stats.torn_repaired++;
    }
    if (!has_start)
        write_shift_start(log, now_ms);
}

static void close_file(mb_shiftlog *log, int64_t now_ms)
{
    if (log->fd < 0)
        return;
    do_sync(log, now_ms);
    close(log->fd);
    log->fd = -1;
    log->need_newline = 0;
}

/* Shift switch and open retries; called before every record. */
static int prepare(mb_shiftlog *log, int64_t now_ms, char *err)
{
    time_t now_s = (time_t)(now_ms >= 0 ? now_ms / 1000
                                        : -((-now_ms + 999) / 1000));
    int ended = 0;
    if (!log->have_shift || now_s >= log->shift.next || now_s < log->shift.start) {
        mb_shift_now next;
        int rc = mb_shift_at(&log->cal, now_s, &next);
        if (rc < 0)
            return mb_err_set(err, rc, "shift log: no shift for time %lld",
                              (long long)now_s);
        int same = log->have_shift && strcmp(next.name, log->shift.name) == 0 &&
                   strcmp(next.date, log->shift.date) == 0;
        if (!same) {
            if (log->have_shift) {
                write_shift_end(log, now_ms);
                ended = 1;
            }
            close_file(log, now_ms);
            memset(&log->counts, 0, sizeof log->counts);
            log->shift = next;
            log->have_shift = 1;
            apply_retention(log);
            open_shift_file(log, now_ms, err);
        } else {
            log->shift = next; /* the clock stepped back within the shift */
        }
    }
    if (log->fd < 0 && now_ms >= log->next_open_ms)
        open_shift_file(log, now_ms, err);
    return ended;
}

/* ---- public ---- */

void mb_shiftlog_close(mb_shiftlog *log)
{
    if (!log)
        return;
    close_file(log, mb_shiftlog_now_ms());
    free(log->buf);
    free(log);
}

int mb_shiftlog_open(const mb_shiftlog_config *cfg, int64_t now_ms,
                     mb_shiftlog **out, char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "shift log: no output handle");
    *out = NULL;
    if (!cfg || !cfg->folder || !cfg->folder[0] || !cfg->calendar)
        return mb_err_set(err, MB_EINVAL,
                          "shift log: logs.folder and the shift calendar are "
                          "required");
    if (strlen(cfg->folder) >= LOG_PATH_LEN)
        return mb_err_set(err, MB_EINVAL, "shift log: logs.folder is longer "
                                          "than %d bytes",
                          LOG_PATH_LEN - 1);
    if (cfg->flush_interval_s < 0 || cfg->retention_days < 0)
        return mb_err_set(err, MB_EINVAL,
                          "shift log: logs.flush_interval_s and "
                          "logs.retention_days must not be negative");
    mb_shift_calendar check;
    int rc = mb_shift_calendar_init(&check, cfg->calendar->shifts,
                                    cfg->calendar->n, "shifts", err);
    if (rc < 0)
        return rc;
    mb_shiftlog *log = calloc(1, sizeof *log);
    if (!log)
        return mb_err_set(err, MB_ENOMEM, "shift log: out of memory");
    log->fd = -1;
    if (!(log->buf = malloc(LINE_CAP + 1))) {
        rc = mb_err_set(err, MB_ENOMEM, "shift log: out of memory");
        goto fail;
    }
    snprintf(log->folder, sizeof log->folder, "%s", cfg->folder);
    snprintf(log->station, sizeof log->station, "%s",
             cfg->station ? cfg->station : "");
    log->cal = check;
    log->flush_s = cfg->flush_interval_s;
    log->retention_days = cfg->retention_days;
    log->slot = cfg->slot;
    snprintf(log->model, sizeof log->model, "%s",
             cfg->model ? cfg->model : "");
    snprintf(log->checksum, sizeof log->checksum, "%s",
             cfg->model_checksum ? cfg->model_checksum : "");
    if (err)
        err[0] = '\0';
    rc = prepare(log, now_ms, err);
    if (rc < 0)
        goto fail;
    *out = log;
    return MB_OK;
fail:
    mb_shiftlog_close(log);
    return rc;
}

int mb_shiftlog_part(mb_shiftlog *log, int64_t now_ms,
                     const mb_shiftlog_part_rec *rec, char *err)
{
    if (!log || !rec)
        return mb_err_set(err, MB_EINVAL, "shift log: no log or record");
    static const char *const verdicts[] = {NULL, "pass", "reject", "fault"};
    if (rec->verdict < MB_SHIFTLOG_PASS || rec->verdict > MB_SHIFTLOG_FAULT)
        return mb_err_set(err, MB_EINVAL,
                          "shift log: verdict %d is not pass, reject or fault",
                          rec->verdict);
    int rc = prepare(log, now_ms, err);
    if (rc < 0)
        return rc;
    int nr = rec->n_reasons < 0 ? 0
             : rec->n_reasons > MB_SHIFTLOG_MAX_REASONS
                 ? MB_SHIFTLOG_MAX_REASONS
                 : rec->n_reasons;
    int nm = rec->n_modes < 0 ? 0
             : rec->n_modes > MB_SHIFTLOG_MAX_MODES ? MB_SHIFTLOG_MAX_MODES
                                                    : rec->n_modes;
    int ng = rec->n_gauges < 0 ? 0
             : rec->n_gauges > MB_SHIFTLOG_MAX_GAUGES ? MB_SHIFTLOG_MAX_GAUGES
                                                      : rec->n_gauges;
    out_t o;
    begin(&o, log, "part", now_ms);
    putf(&o, ",\"seq\":%lu,\"frame_seq\":%llu,\"slot\":%d",
         (unsigned long)rec->seq, (unsigned long long)rec->frame_seq,
         rec->slot);
    put_key(&o, "part");
    put_str(&o, rec->part, 1);
    put_key(&o, "model_checksum");
    put_str(&o, rec->model_checksum, 1);
    putf(&o, ",\"verdict\":\"%s\"", verdicts[rec->verdict]);
    put_key(&o, "reason");
    if (nr > 0) {
        put_str(&o, rec->reasons[0].name, 0);
        putf(&o, ",\"code\":%d", rec->reasons[0].code);
    } else {
        put(&o, "null,\"code\":0");
    }
    put(&o, ",\"reasons\":[");
    for (int i = 0; i < nr; i++) {
        const mb_shiftlog_reason *r = &rec->reasons[i];
        putf(&o, "%s{\"code\":%d", i ? "," : "", r->code);
        put_key(&o, "name");
        put_str(&o, r->name, 0);
        put_key(&o, "text");
        put_str(&o, r->text, 0);
        put_key(&o, "value");
        put_num(&o, r->value);
        put_key(&o, "limit");
        put_num(&o, r->limit);
        if (r->located) {
            putf(&o, ",\"outline\":%d", r->outline);
            put_key(&o, "position");
            put_num(&o, r->position);
            put_key(&o, "angle_deg");
            put_num(&o, r->angle_deg);
            put_key(&o, "depth_mm");
            put_num(&o, r->depth_mm);
            put_key(&o, "extent_mm");
            put_num(&o, r->extent_mm);
        }
        put(&o, "}");
    }
    put(&o, "],\"pose\":");
    if (rec->has_pose) {
        put(&o, "{\"x\":");
        put_num(&o, rec->x);
        put_key(&o, "y");
        put_num(&o, rec->y);
        put_key(&o, "angle");
        put_num(&o, rec->angle_deg);
        put_key(&o, "scale");
        put_num(&o, rec->scale);
        put(&o, "}");
    } else {
        put(&o, "null");
    }
    put(&o, ",\"modes\":[");
    for (int i = 0; i < nm; i++) {
        if (i)
            put(&o, ",");
        put_num(&o, rec->modes[i]);
    }
    put(&o, "]");
    put_key(&o, "t2");
    put_num(&o, rec->t2);
    put_key(&o, "residual");
    put_num(&o, rec->residual);
    put_key(&o, "size_mm");
    put_num(&o, rec->size_mm);
    put(&o, ",\"gauges\":[");
    for (int i = 0; i < ng; i++) {
        const mb_shiftlog_gauge *g = &rec->gauges[i];
        put(&o, i ? ",{\"name\":" : "{\"name\":");
        put_str(&o, g->name, 0);
        put_key(&o, "value_mm");
        put_num(&o, g->value_mm);
        put_key(&o, "nominal_mm");
        put_num(&o, g->nominal_mm);
        put_key(&o, "tol_lo_mm");
        put_num(&o, g->tol_lo_mm);
        put_key(&o, "tol_hi_mm");
        put_num(&o, g->tol_hi_mm);
        putf(&o, ",\"ok\":%s}", g->ok ? "true" : "false");
    }
    put(&o, "]");
    put_key(&o, "cycle_ms");
    put_num(&o, rec->cycle_ms);
    put_key(&o, "image");
    put_str(&o, rec->image, 1);
    put(&o, "}\n");
    /* Counted whether or not the line reaches the disk: the PLC's counters
       follow the parts inspected, not the log's health. */
    const char *name = nr > 0 ? rec->reasons[0].name : NULL;
    count_part(log, rec->verdict, nr > 0, nr > 0 ? rec->reasons[0].code : 0,
               name, name ? strlen(name) : 0);
    return emit(log, now_ms, &o, err);
}

int mb_shiftlog_drift(mb_shiftlog *log, int64_t now_ms,
                      const mb_shiftlog_drift_rec *rec, char *err)
{
    if (!log || !rec)
        return mb_err_set(err, MB_EINVAL, "shift log: no log or record");
    int rc = prepare(log, now_ms, err);
    if (rc < 0)
        return rc;
    out_t o;
    begin(&o, log, "drift", now_ms);
    put_key(&o, "chart");
    put_str(&o, rec->chart, 0);
    putf(&o, ",\"state\":\"%s\",\"direction\":\"%s\"",
         rec->signal ? "signal" : "cleared", rec->up ? "up" : "down");
    put_key(&o, "ewma");
    put_num(&o, rec->ewma);
    put_key(&o, "target");
    put_num(&o, rec->target);
    put_key(&o, "lcl");
    put_num(&o, rec->lcl);
    put_key(&o, "ucl");
    put_num(&o, rec->ucl);
    putf(&o, ",\"since_seq\":%lu", (unsigned long)rec->since_seq);
    put_key(&o, "since_time");
    put_time(&o, rec->since_ms);
    putf(&o, ",\"parts_since\":%llu}\n",
         (unsigned long long)rec->parts_since);
    if (rec->signal)
        log->counts.drift_signals++;
    return emit(log, now_ms, &o, err);
}

int mb_shiftlog_fault(mb_shiftlog *log, int64_t now_ms, const char *source,
                      int lost, int code, const char *text, double duration_s,
                      char *err)
{
    if (!log || !source)
        return mb_err_set(err, MB_EINVAL, "shift log: no log or source");
    int rc = prepare(log, now_ms, err);
    if (rc < 0)
        return rc;
    out_t o;
    begin(&o, log, "fault", now_ms);
    put_key(&o, "source");
    put_str(&o, source, 0);
    putf(&o, ",\"state\":\"%s\",\"code\":%d", lost ? "lost" : "restored",
         code);
    put_key(&o, "text");
    put_str(&o, text, 0);
    if (!lost) {
        put_key(&o, "duration_s");
        put_num(&o, duration_s);
    }
    put(&o, "}\n");
    return emit(log, now_ms, &o, err);
}

int mb_shiftlog_model(mb_shiftlog *log, int64_t now_ms, int changed, int slot,
                      const char *path, const char *checksum, char *err)
{
    if (!log)
        return mb_err_set(err, MB_EINVAL, "shift log: no log");
    log->slot = slot;
    snprintf(log->model, sizeof log->model, "%s", path ? path : "");
    snprintf(log->checksum, sizeof log->checksum, "%s",
             checksum ? checksum : "");
    int rc = prepare(log, now_ms, err);
    if (rc < 0)
        return rc;
    out_t o;
    begin(&o, log, "model", now_ms);
    putf(&o, ",\"event\":\"%s\",\"slot\":%d", changed ? "changed" : "loaded",
         slot);
    put_key(&o, "path");
    put_str(&o, path, 1);
    put_key(&o, "model_checksum");
    put_str(&o, checksum, 1);
    put(&o, "}\n");
    return emit(log, now_ms, &o, err);
}

int mb_shiftlog_tick(mb_shiftlog *log, int64_t now_ms)
{
    if (!log)
        return MB_EINVAL;
    int ended = prepare(log, now_ms, NULL);
    if (log->dirty &&
        now_ms - log->last_sync_ms >= (int64_t)log->flush_s * 1000)
        do_sync(log, now_ms);
    return ended > 0 ? 1 : 0;
}

int mb_shiftlog_flush(mb_shiftlog *log)
{
    if (!log)
        return MB_EINVAL;
    return do_sync(log, mb_shiftlog_now_ms());
}

int mb_shiftlog_problem(const mb_shiftlog *log)
{
    return log ? log->stats.problem : 0;
}

void mb_shiftlog_get_counts(const mb_shiftlog *log, mb_shiftlog_counts *out)
{
    if (!out)
        return;
    if (!log)
        memset(out, 0, sizeof *out);
    else
        *out = log->counts;
}

void mb_shiftlog_get_stats(const mb_shiftlog *log, mb_shiftlog_stats *out)
{
    if (!out)
        return;
    if (!log)
        memset(out, 0, sizeof *out);
    else
        *out = log->stats;
}

const char *mb_shiftlog_reason_name(const mb_shiftlog *log, int code)
{
    if (!log || code < 0 || code >= MB_SHIFTLOG_CODES)
        return "";
    return log->reason_names[code];
}

const mb_shift_now *mb_shiftlog_shift(const mb_shiftlog *log)
{
    return log && log->have_shift ? &log->shift : NULL;
}

const char *mb_shiftlog_path(const mb_shiftlog *log)
{
    return log ? log->path : "";
}

const char *mb_shiftlog_last_summary(const mb_shiftlog *log)
{
    return log ? log->summary : "";
}

void mb_shiftlog_reset_counts(mb_shiftlog *log)
{
    if (log)
        memset(&log->counts, 0, sizeof log->counts);
}

int mb_shiftlog_fd(const mb_shiftlog *log)
{
    return log ? log->fd : -1;
}
