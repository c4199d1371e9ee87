/*
 * io/json_util.h - reading JSON documents (cJSON) with errors a person can
 * act on, and printing doubles so they read back bit for bit.
 *
 * Every reader here writes one sentence "NAME: FIELD: expected ..., found
 * ..." into the caller's err (MB_ERR_LEN bytes, may be NULL), where NAME is
 * the file (or buffer) name and FIELD a path such as
 * "payload.shape.mean[17]". Codes: MB_EFORMAT for syntax, a missing member
 * or a mistyped value; MB_ENUMERIC for null, or a number cJSON read as
 * infinite (e.g. 1e999), where a finite number belongs; MB_ESIZE for an
 * array of the wrong length; MB_ENOMEM.
 *
 * Used by the model file, the point files and later documents (config,
 * calibration); the caller owns every cJSON tree.
 */
#ifndef MB_JSON_UTIL_H
#define MB_JSON_UTIL_H

#include <cjson/cJSON.h>
#include <stddef.h>

/** Longest field path the readers build ("payload.shape.vectors[3][17]"). */
#define MB_JSON_FIELD_LEN 160

/** Expected JSON types for mb_json_member. */
typedef enum {
    MB_JSON_OBJECT,
    MB_JSON_ARRAY,
    MB_JSON_STRING,
    MB_JSON_NUMBER, /**< any number, finite or not; check with mb_json_number */
    MB_JSON_BOOL
} mb_json_type;

/**
 * Parse len bytes (need not be NUL-terminated) as one JSON document; only
 * white space may follow it. *out is the tree (free with cJSON_Delete).
 * Return value: 0; MB_EFORMAT (the sentence gives line and column, and says
 * when the text ends early, as a truncated file does); MB_ENOMEM.
 */
int mb_json_parse(const char *text, size_t len, const char *name, cJSON **out,
                  char *err);

/** A short phrase for what an item is, for "found ...": "null", "a string
    \"ab\"", "an array of 3 items", "2.5", "a number out of range". */
void mb_json_describe(const cJSON *item, char *buf, size_t size);

/**
 * Write "NAME: FIELD: expected <fmt...>, found <what item is>" into err
 * (FIELD and its colon left out when field is "") and return code.
 */
int mb_json_expected(char *err, int code, const char *name, const char *field,
                     const cJSON *item, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 6, 7)))
#endif
    ;

/** "parent.key", or "key" when parent is "" (into field, MB_JSON_FIELD_LEN). */
void mb_json_field(char *field, const char *parent, const char *key);

/**
 * The member `key` of obj (an object) with the given type. parent is obj's
 * field path ("" for the root), used in the sentence.
 * Return value: 0; MB_EFORMAT (missing or of another type).
 */
int mb_json_member(const cJSON *obj, const char *name, const char *parent,
                   const char *key, mb_json_type type, const cJSON **out,
                   char *err);

/**
 * A finite number. field names the item in the sentence.
 * Return value: 0; MB_EFORMAT (not a number, or missing when item is NULL);
 * MB_ENUMERIC (null or infinite).
 */
int mb_json_number(const cJSON *item, const char *name, const char *field,
                   double *out, char *err);

/**
 * An integer lo <= v <= hi. Return value: 0; MB_EFORMAT (not an integer or
 * out of range); MB_ENUMERIC (null or infinite).
 */
int mb_json_int(const cJSON *item, const char *name, const char *field, int lo,
                int hi, int *out, char *err);

/**
 * An array of exactly n finite numbers, into out[0..n-1].
 * Return value: 0; MB_EFORMAT (not an array, an element not a number);
 * MB_ESIZE (length not n); MB_ENUMERIC (null or infinite element).
 */
int mb_json_numbers(const cJSON *array, const char *name, const char *field,
                    int n, double *out, char *err);

/** Member helpers: mb_json_member followed by mb_json_number / _int. */
int mb_json_member_number(const cJSON *obj, const char *name,
                          const char *parent, const char *key, double *out,
                          char *err);
int mb_json_member_int(const cJSON *obj, const char *name, const char *parent,
                       const char *key, int lo, int hi, int *out, char *err);

/**
 * Check the root's "format" (a string equal to format) and "version" (an
 * integer equal to version).
 * Return value: 0; MB_EFORMAT (missing or mistyped); MB_EVERSION (another
 * format, or a version this build does not read: the sentence names the
 * version found and the one supported).
 */
int mb_json_check_header(const cJSON *root, const char *name,
                         const char *format, int version, char *err);

/** Longest text mb_json_format_double writes, with its NUL. */
#define MB_JSON_NUMBER_LEN 32

/**
 * The shortest decimal text (15, 16 or 17 significant digits) that strtod
 * reads back to exactly v, "-0" for negative zero. v must be finite.
 * cJSON's own printer is not used for values because it accepts a 15-digit
 * text that reads back one unit in the last place off.
 */
void mb_json_format_double(double v, char buf[MB_JSON_NUMBER_LEN]);

/** A cJSON raw item holding mb_json_format_double(v); NULL when out of
    memory. v must be finite. */
cJSON *mb_json_raw_number(double v);

/* Building documents. Each takes the writer's running *ok and clears it on
   failure, so a writer checks once at the end (and then discards the
   document). */

/** Add item to obj under key; a NULL item (a failed create) or a failed add
    clears *ok, and the item is freed. */
void mb_json_add(cJSON *obj, const char *key, cJSON *item, int *ok);

/** Append item to array; as mb_json_add. */
void mb_json_push(cJSON *array, cJSON *item, int *ok);

/** An array of mb_json_raw_number(v[i]), i < n; stops at the first
    failure (a non-finite value, out of memory), clearing *ok. NULL only
    when the array itself could not be made. */
cJSON *mb_json_raw_array(const double *v, size_t n, int *ok);

#endif
