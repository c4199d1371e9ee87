/*
 * io/json_util.c - JSON reading with sentences naming file and field, and
 * exact printing of doubles.
 *
 * Exactness: a double printed with 17 significant digits always reads back
 * to itself with a correctly rounding strtod (IEEE 754-2008, 5.12.2: 17
 * digits suffice for binary64); glibc's strtod rounds correctly. We try 15
 * and 16 digits first only to keep the file short and readable, and keep
 * the first that reads back exactly (tests/io/test_model_file.c checks
 * 200000 random bit patterns).
 */
#include "json_util.h"

#include "error.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int is_space(char c)
{
    return c == ' ' || c == '\t' || c == '\n' || c == '\r';
}

/* 1-based line and column of byte offset pos. */
static void line_col(const char *text, size_t pos, int *line, int *col)
{
    int l = 1, c = 1;
    for (size_t i = 0; i < pos; i++) {
        if (text[i] == '\n') {
            l++;
            c = 1;
        } else {
            c++;
        }
    }
    *line = l;
    *col = c;
}

/* 1 when text ends inside a string or with an object or array still open,
   as a file cut short does. */
static int ends_open(const char *text, size_t len)
{
    long depth = 0;
    int in_string = 0;
    for (size_t i = 0; i < len; i++) {
        char c = text[i];
        if (in_string) {
            if (c == '\\')
                i++;
            else if (c == '"')
                in_string = 0;
        } else if (c == '"') {
            in_string = 1;
        } else if (c == '{' || c == '[') {
            depth++;
        } else if (c == '}' || c == ']') {
            depth--;
        }
    }
    return in_string || depth > 0;
}

int mb_json_parse(const char *text, size_t len, const char *name, cJSON **out,
                  char *err)
{
    *out = NULL;
    size_t first = 0;
    while (first < len && is_space(text[first]))
        first++;
    if (first == len)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: the file is empty; expected a JSON document",
                          name);
    /* cJSON needs a terminator to stop at; a copy also keeps it from
       reading past a caller's buffer that has none. */
    char *buf = malloc(len + 1);
    if (!buf)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory reading JSON",
                          name);
    memcpy(buf, text, len);
    buf[len] = '\0';
    size_t last = len; /* one past the last non-space byte */
    while (last > 0 && is_space(buf[last - 1]))
        last--;
    const char *end = NULL;
    cJSON *root = cJSON_ParseWithLengthOpts(buf, len + 1, &end, 0);
    int line, col;
    if (!root) {
        size_t pos = end && end >= buf ? (size_t)(end - buf) : 0;
        if (pos > len)
            pos = len;
        int rc;
        line_col(buf, pos, &line, &col);
        if (pos + 1 >= last || ends_open(buf, len))
            rc = mb_err_set(err, MB_EFORMAT,
                            "%s: the JSON document ends early, with a string, "
                            "object or array still open (truncated file?); "
                            "the parser stopped at line %d, column %d",
                            name, line, col);
        else
            rc = mb_err_set(err, MB_EFORMAT,
                            "%s: not valid JSON at line %d, column %d", name,
                            line, col);
        free(buf);
        return rc;
    }
    size_t pos = (size_t)(end - buf);
    while (pos < len && is_space(buf[pos]))
        pos++;
    if (pos < len) {
        line_col(buf, pos, &line, &col);
        free(buf);
        cJSON_Delete(root);
        return mb_err_set(err, MB_EFORMAT,
                          "%s: unexpected text after the JSON document at "
                          "line %d, column %d; expected the end of the file",
                          name, line, col);
    }
    free(buf);
    *out = root;
    return MB_OK;
}

void mb_json_describe(const cJSON *item, char *buf, size_t size)
{
    if (!item) {
        snprintf(buf, size, "nothing");
    } else if (cJSON_IsNull(item)) {
        snprintf(buf, size, "null");
    } else if (cJSON_IsTrue(item)) {
        snprintf(buf, size, "true");
    } else if (cJSON_IsFalse(item)) {
        snprintf(buf, size, "false");
    } else if (cJSON_IsNumber(item)) {
        char num[MB_JSON_NUMBER_LEN];
        if (isfinite(item->valuedouble)) {
            mb_json_format_double(item->valuedouble, num);
            snprintf(buf, size, "%s", num);
        } else
            snprintf(buf, size, "a number out of range (infinite)");
    } else if (cJSON_IsString(item)) {
        /* Quote at most 24 bytes, printable ASCII only. */
        char q[32];
        size_t n = 0;
        const char *s = item->valuestring;
        for (; s[n] && n < 24; n++)
            q[n] = s[n] >= 0x20 && s[n] < 0x7f && s[n] != '"' ? s[n] : '?';
        q[n] = '\0';
        snprintf(buf, size, "a string \"%s%s\"", q, s[n] ? "..." : "");
    } else if (cJSON_IsArray(item)) {
        int n = cJSON_GetArraySize(item);
        snprintf(buf, size, "an array of %d item%s", n, n == 1 ? "" : "s");
    } else if (cJSON_IsObject(item)) {
        snprintf(buf, size, "an object");
    } else {
        snprintf(buf, size, "an unknown value");
    }
}

int mb_json_expected(char *err, int code, const char *name, const char *field,
                     const cJSON *item, const char *fmt, ...)
{
    char expected[160], found[96];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(expected, sizeof expected, fmt, ap);
    va_end(ap);
    mb_json_describe(item, found, sizeof found);
    return mb_err_set(err, code, "%s: %s%sexpected %s, found %s", name, field,
                      field[0] ? ": " : "", expected, found);
}

void mb_json_field(char *field, const char *parent, const char *key)
{
    if (parent && parent[0])
        snprintf(field, MB_JSON_FIELD_LEN, "%s.%s", parent, key);
    else
        snprintf(field, MB_JSON_FIELD_LEN, "%s", key);
}

static const char *type_phrase(mb_json_type type)
{
    switch (type) {
    case MB_JSON_OBJECT: return "an object";
    case MB_JSON_ARRAY: return "an array";
    case MB_JSON_STRING: return "a string";
    case MB_JSON_NUMBER: return "a number";
    case MB_JSON_BOOL: return "true or false";
    }
    return "a value";
}

static int has_type(const cJSON *item, mb_json_type type)
{
    switch (type) {
    case MB_JSON_OBJECT: return cJSON_IsObject(item);
    case MB_JSON_ARRAY: return cJSON_IsArray(item);
    case MB_JSON_STRING: return cJSON_IsString(item) && item->valuestring;
    case MB_JSON_NUMBER: return cJSON_IsNumber(item);
    case MB_JSON_BOOL: return cJSON_IsBool(item);
    }
    return 0;
}

int mb_json_member(const cJSON *obj, const char *name, const char *parent,
                   const char *key, mb_json_type type, const cJSON **out,
                   char *err)
{
    char field[MB_JSON_FIELD_LEN];
    *out = NULL;
    mb_json_field(field, parent, key);
    const cJSON *item = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!item)
        return mb_err_set(err, MB_EFORMAT, "%s: %s: missing; expected %s", name,
                          field, type_phrase(type));
    if (!has_type(item, type))
        return mb_json_expected(err, MB_EFORMAT, name, field, item, "%s",
                                type_phrase(type));
    *out = item;
    return MB_OK;
}

int mb_json_number(const cJSON *item, const char *name, const char *field,
                   double *out, char *err)
{
    if (!item)
        return mb_err_set(err, MB_EFORMAT,
                          "%s: %s: missing; expected a finite number", name,
                          field);
    if (cJSON_IsNull(item) ||
        (cJSON_IsNumber(item) && !isfinite(item->valuedouble)))
        return mb_json_expected(err, MB_ENUMERIC, name, field, item,
                                "a finite number");
    if (!cJSON_IsNumber(item))
        return mb_json_expected(err, MB_EFORMAT, name, field, item,
                                "a finite number");
    *out = item->valuedouble;
    return MB_OK;
}

int mb_json_int(const cJSON *item, const char *name, const char *field, int lo,
                int hi, int *out, char *err)
{
    double v;
    int rc = mb_json_number(item, name, field, &v, err);
    if (rc < 0)
        return rc;
    /* Range first: the cast below is only defined inside int's range. */
    if (!(v >= (double)lo && v <= (double)hi) || v != floor(v))
        return mb_json_expected(err, MB_EFORMAT, name, field, item,
                                "an integer from %d to %d", lo, hi);
    *out = (int)v;
    return MB_OK;
}

int mb_json_numbers(const cJSON *array, const char *name, const char *field,
                    int n, double *out, char *err)
{
    char elem[MB_JSON_FIELD_LEN + 16];
    if (!cJSON_IsArray(array))
        return mb_json_expected(err, MB_EFORMAT, name, field, array,
                                "an array of %d numbers", n);
    int size = cJSON_GetArraySize(array);
    if (size != n)
        return mb_err_set(err, MB_ESIZE,
                          "%s: %s: expected %d numbers, found %d", name, field,
                          n, size);
    int i = 0;
    const cJSON *it;
    cJSON_ArrayForEach(it, array)
    {
        snprintf(elem, sizeof elem, "%s[%d]", field, i);
        int rc = mb_json_number(it, name, elem, &out[i], err);
        if (rc < 0)
            return rc;
        i++;
    }
    return MB_OK;
}

int mb_json_member_number(const cJSON *obj, const char *name,
                          const char *parent, const char *key, double *out,
                          char *err)
{
    char field[MB_JSON_FIELD_LEN];
    mb_json_field(field, parent, key);
    const cJSON *item = cJSON_GetObjectItemCaseSensitive(obj, key);
    return mb_json_number(item, name, field, out, err);
}

int mb_json_member_int(const cJSON *obj, const char *name, const char *parent,
                       const char *key, int lo, int hi, int *out, char *err)
{
    char field[MB_JSON_FIELD_LEN];
    mb_json_field(field, parent, key);
    const cJSON *item = cJSON_GetObjectItemCaseSensitive(obj, key);
    return mb_json_int(item, name, field, lo, hi, out, err);
}

int mb_json_check_header(const cJSON *root, const char *name,
                         const char *format, int version, char *err)
{
    const cJSON *f, *v;
    if (!cJSON_IsObject(root))
        return mb_json_expected(err, MB_EFORMAT, name, "", root,
                                "a JSON object with \"format\": \"%s\"",
                                format);
    int rc = mb_json_member(root, name, "", "format", MB_JSON_STRING, &f, err);
    if (rc < 0)
        return rc;
    if (strcmp(f->valuestring, format) != 0)
        return mb_json_expected(err, MB_EVERSION, name, "format", f,
                                "\"%s\" (another kind of document)", format);
    v = cJSON_GetObjectItemCaseSensitive(root, "version");
    if (!v)
        return mb_err_set(err, MB_EFORMAT, "%s: version: missing; expected %d",
                          name, version);
    if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble) ||
        v->valuedouble != floor(v->valuedouble))
        return mb_json_expected(err, MB_EFORMAT, name, "version", v,
                                "an integer");
    if (v->valuedouble != (double)version)
        return mb_err_set(err, MB_EVERSION,
                          "%s: version: found version %.17g, but this build of "
                          "modeband reads only version %d of \"%s\"",
                          name, v->valuedouble, version, format);
    return MB_OK;
}

void mb_json_format_double(double v, char buf[MB_JSON_NUMBER_LEN])
{
    for (int digits = 15; digits <= 17; digits++) {
        snprintf(buf, MB_JSON_NUMBER_LEN, "%.*g", digits, v);
        if (strtod(buf, NULL) == v)
            return;
    }
}

cJSON *mb_json_raw_number(double v)
{
    char buf[MB_JSON_NUMBER_LEN];
    if (!isfinite(v))
        return NULL;
    mb_json_format_double(v, buf);
    return cJSON_CreateRaw(buf);
}

void mb_json_add(cJSON *obj, const char *key, cJSON *item, int *ok)
{
    if (!item || !cJSON_AddItemToObject(obj, key, item)) {
        cJSON_Delete(item);
        *ok = 0;
    }
}

void mb_json_push(cJSON *array, cJSON *item, int *ok)
{
    if (!item || !cJSON_AddItemToArray(array, item)) {
        cJSON_Delete(item);
        *ok = 0;
    }
}

cJSON *mb_json_raw_array(const double *v, size_t n, int *ok)
{
    cJSON *a = cJSON_CreateArray();
    if (!a) {
        *ok = 0;
        return NULL;
    }
    for (size_t i = 0; i < n && *ok; i++)
        mb_json_push(a, mb_json_raw_number(v[i]), ok);
    return a;
}
