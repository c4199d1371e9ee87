/*
 * tests/io/test_model_file.c - the model file: exact round trip, the
 * checksum, and one test per kind of bad input, each asserting the exact
 * MB_E code and that the sentence names the file and the field.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "json_util.h"
#include "model_file.h"
#include "model_stamp.h"
#include "shape_model.h"

#include <cjson/cJSON.h>
#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <zlib.h>

#define NAME "model.json"

/* ---- a test model with awkward values ---- */

static uint64_t rng_state = 0x9e3779b97f4a7c15ull;

static uint64_t rng_next(void) /* xorshift64* (Vigna 2016) */
{
    rng_state ^= rng_state >> 12;
    rng_state ^= rng_state << 25;
    rng_state ^= rng_state >> 27;
    return rng_state * 0x2545f4914f6cdd1dull;
}

/* A finite double with a random bit pattern: any exponent, any mantissa. */
static double rng_any_double(void)
{
    for (;;) {
        uint64_t u = rng_next();
        double v;
        memcpy(&v, &u, sizeof v);
        if (isfinite(v))
            return v;
    }
}

static double rng_unit(void)
{
    return (double)(rng_next() >> 11) / 9007199254740992.0 - 0.5;
}

/* Layout 12 + 8 points: d = 40; 3 modes, 6 eigenvalues. */
#define T_N0 12
#define T_N1 8
#define T_D (2 * (T_N0 + T_N1))
#define T_K 3
#define T_NEIG 6

static mb_shape_model *make_model(void)
{
    mb_layout l;
    memset(&l, 0, sizeof l);
    l.n_outlines = 2;
    l.counts[0] = T_N0;
    l.counts[1] = T_N1;
    l.n_points = T_N0 + T_N1;
    double mean[T_D], modes[T_D * T_K];
    /* Extremes first, then random bit patterns. */
    const double special[] = {0.0,
                              -0.0,
                              4.9406564584124654e-324,
                              DBL_MIN,
                              DBL_MAX,
                              -DBL_MAX,
                              0.1,
                              1.0 / 3.0,
                              0.30000000000000004,
                              1e-300,
                              -1e300,
                              9007199254740993.0,
                              1.0000000000000002};
    int ns = (int)(sizeof special / sizeof special[0]);
    for (int i = 0; i < T_D; i++)
        mean[i] = i < ns ? special[i] : rng_any_double();
    /* Orthonormal modes by Gram-Schmidt of random vectors (full mantissas). */
    for (int j = 0; j < T_K; j++) {
        double *v = modes + j * T_D;
        for (int i = 0; i < T_D; i++)
            v[i] = rng_unit();
        for (int pass = 0; pass < 2; pass++)
            for (int q = 0; q < j; q++) {
                double dot = 0.0;
                for (int i = 0; i < T_D; i++)
                    dot += v[i] * modes[q * T_D + i];
                for (int i = 0; i < T_D; i++)
                    v[i] -= dot * modes[q * T_D + i];
            }
        double nrm = 0.0;
        for (int i = 0; i < T_D; i++)
            nrm += v[i] * v[i];
        nrm = sqrt(nrm);
        for (int i = 0; i < T_D; i++)
            v[i] /= nrm;
    }
    const double eig[T_NEIG] = {
        1e300, 12.345678901234567, 1e-300, 4.9406564584124654e-324, 0.0, 0.0};
    mb_train_info ti;
    memset(&ti, 0, sizeof ti);
    ti.n_samples = 30;
    ti.gpa_iterations = 7;
    ti.gpa_converged = 1;
    ti.variance_fraction = 0.98;
    ti.fixed_modes = 0;
    snprintf(ti.created, sizeof ti.created, "2024-05-01T12:00:00Z");
    snprintf(ti.source, sizeof ti.source,
             "points/ \"quoted\" back\\slash\nnew line\ttab \xc3\x98-ring");
    mb_shape_model *m = NULL;
    char err[MB_ERR_LEN] = "";
    int rc = mb_shape_model_create(&l, T_K, mean, modes, T_D, T_NEIG, eig, &ti,
                                   &m, err);
    if (rc != 0)
        fail_msg("mb_shape_model_create: %s", err);
    return m;
}

static void assert_models_identical(const mb_shape_model *a,
                                    const mb_shape_model *b)
{
    int d = mb_shape_model_dim(a), k = mb_shape_model_n_modes(a);
    int ne = mb_shape_model_n_eig(a);
    assert_int_equal(mb_shape_model_dim(b), d);
    assert_int_equal(mb_shape_model_n_modes(b), k);
    assert_int_equal(mb_shape_model_n_eig(b), ne);
    assert_memory_equal(mb_shape_model_layout(a), mb_shape_model_layout(b),
                        sizeof(mb_layout));
    /* Bit for bit, -0.0 and denormals included. */
    assert_memory_equal(mb_shape_model_mean(a), mb_shape_model_mean(b),
                        (size_t)d * sizeof(double));
    assert_memory_equal(mb_shape_model_modes(a), mb_shape_model_modes(b),
                        (size_t)d * k * sizeof(double));
    assert_memory_equal(mb_shape_model_eig(a), mb_shape_model_eig(b),
                        (size_t)ne * sizeof(double));
    const mb_train_info *ia = mb_shape_model_info(a);
    const mb_train_info *ib = mb_shape_model_info(b);
    assert_int_equal(ia->n_samples, ib->n_samples);
    assert_int_equal(ia->gpa_iterations, ib->gpa_iterations);
    assert_int_equal(ia->gpa_converged, ib->gpa_converged);
    assert_memory_equal(&ia->variance_fraction, &ib->variance_fraction,
                        sizeof(double));
    assert_int_equal(ia->fixed_modes, ib->fixed_modes);
    assert_string_equal(ia->created, ib->created);
    assert_string_equal(ia->source, ib->source);
}

/* ---- scratch folder ---- */

static char scratch[64];

static int setup_scratch(void **state)
{
    snprintf(scratch, sizeof scratch, "model_scratch_XXXXXX");
    return mkdtemp(scratch) ? 0 : -1;
}

static int teardown_scratch(void **state)
{
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", scratch);
    return system(cmd) == 0 ? 0 : -1;
}

static void scratch_path(char *buf, size_t n, const char *name)
{
    snprintf(buf, n, "%s/%s", scratch, name);
}

/* ---- round trip ---- */

static void test_crc32_check_value(void **state)
{
    /* Check value of CRC-32 (CRC-32/ISO-HDLC, the zlib crc32) for the ASCII
       string "123456789": 0xCBF43926, as listed in Greg Cook's "Catalogue of
       parametrised CRC algorithms" (value quoted from memory; the catalogue
       calls it "check"). The model checksum is this CRC. */
    const char *s = "123456789";
    assert_int_equal(crc32(0L, (const Bytef *)s, 9), 0xCBF43926ul);
}

static void test_round_trip_bit_exact(void **state)
{
    char path[128], err[MB_ERR_LEN] = "", tmp[140];
    scratch_path(path, sizeof path, "rt.json");
    mb_shape_model *m = make_model(), *back = NULL;
    assert_int_equal(mb_model_save(path, m, err), 0);
    snprintf(tmp, sizeof tmp, "%s.tmp", path);
    assert_int_not_equal(access(tmp, F_OK), 0); /* renamed away */
    int rc = mb_model_load(path, &back, err);
    if (rc != 0)
        fail_msg("load: %s", err);
    assert_non_null(back);
    assert_models_identical(m, back);
    /* And the text a second save writes is the same byte for byte. */
    char *t1 = NULL, *t2 = NULL;
    size_t n1 = 0, n2 = 0;
    assert_int_equal(mb_model_print(m, &t1, &n1, err), 0);
    assert_int_equal(mb_model_print(back, &t2, &n2, err), 0);
    assert_int_equal(n1, n2);
    assert_memory_equal(t1, t2, n1);
    free(t1);
    free(t2);
    mb_shape_model_close(m);
    mb_shape_model_close(back);
}

static void test_format_double_exact(void **state)
{
    /* 200000 random bit patterns: the printed text reads back to the same
       bits through strtod and through cJSON's parser. (17 significant
       digits always suffice for binary64: IEEE 754-2008, 5.12.2, cited
       from memory; this loop is the check that matters.) */
    char buf[MB_JSON_NUMBER_LEN];
    for (int i = 0; i < 200000; i++) {
        double v = rng_any_double(), back;
        mb_json_format_double(v, buf);
        back = strtod(buf, NULL);
        if (memcmp(&v, &back, sizeof v) != 0)
            fail_msg("%a printed as %s reads back as %a", v, buf, back);
        if (i % 20 == 0) {
            cJSON *n = cJSON_Parse(buf);
            assert_non_null(n);
            assert_memory_equal(&n->valuedouble, &v, sizeof v);
            cJSON_Delete(n);
        }
    }
    /* cJSON's own printer loses this one (prints "0.3"); ours must not. */
    double v = 0.30000000000000004;
    mb_json_format_double(v, buf);
    assert_string_equal(buf, "0.30000000000000004");
    mb_json_format_double(-0.0, buf);
    assert_string_equal(buf, "-0");
}

static void test_save_replaces_and_reports(void **state)
{
    char path[128], err[MB_ERR_LEN] = "";
    mb_shape_model *m = make_model(), *back = NULL;
    scratch_path(path, sizeof path, "over.json");
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs("old contents", f);
    fclose(f);
    assert_int_equal(mb_model_save(path, m, err), 0);
    assert_int_equal(mb_model_load(path, &back, err), 0);
    mb_shape_model_close(back);
    /* A folder that does not exist: MB_EIO naming the file. */
    scratch_path(path, sizeof path, "no/such/folder/m.json");
    assert_int_equal(mb_model_save(path, m, err), MB_EIO);
    assert_non_null(strstr(err, "no/such/folder/m.json"));
    assert_int_equal(mb_model_save(NULL, m, err), MB_EINVAL);
    assert_int_equal(mb_model_save(path, NULL, err), MB_EINVAL);
    mb_shape_model_close(m);
}

/* ---- bad input: helpers ---- */

/* Turn every number below item into a raw item printed exactly, since
   cJSON's printer may change a double (DBL_MAX even prints as a text that
   reads back as infinity). */
static void rawify(cJSON *item)
{
    cJSON *c = item->child;
    while (c) {
        cJSON *next = c->next;
        if (cJSON_IsNumber(c)) {
            char buf[MB_JSON_NUMBER_LEN];
            mb_json_format_double(c->valuedouble, buf);
            if (c->string) /* the replacement needs the key too */
                cJSON_ReplaceItemInObjectCaseSensitive(item, c->string,
                                                       cJSON_CreateRaw(buf));
            else
                cJSON_ReplaceItemViaPointer(item, c, cJSON_CreateRaw(buf));
        } else {
            rawify(c);
        }
        c = next;
    }
}

/* The tree of a valid model document, numbers as raw items (exact). */
static cJSON *valid_doc(void)
{
    mb_shape_model *m = make_model();
    char *text = NULL, err[MB_ERR_LEN];
    size_t n;
    assert_int_equal(mb_model_print(m, &text, &n, err), 0);
    mb_shape_model_close(m);
    cJSON *root = cJSON_Parse(text);
    assert_non_null(root);
    rawify(root);
    free(text);
    return root;
}

/* The item at a path like "payload.shape.mean[17]"; its parent and its key
   (or index) through the out arguments. */
static cJSON *at_path(cJSON *root, const char *path, cJSON **parent, char *key,
                      int *index)
{
    char buf[160];
    snprintf(buf, sizeof buf, "%s", path);
    cJSON *cur = root, *par = NULL;
    char *save = NULL;
    *index = -1;
    for (char *tok = strtok_r(buf, ".", &save); tok;
         tok = strtok_r(NULL, ".", &save)) {
        char *br = strchr(tok, '[');
        if (br)
            *br = '\0';
        par = cur;
        cur = cJSON_GetObjectItemCaseSensitive(cur, tok);
        strcpy(key, tok);
        *index = -1;
        while (br) {
            int i = atoi(br + 1);
            par = cur;
            cur = cJSON_GetArrayItem(cur, i);
            *index = i;
            br = strchr(br + 1, '[');
        }
    }
    *parent = par;
    return cur;
}

/* Replace (value != NULL) or delete the item at path. */
static void edit(cJSON *root, const char *path, cJSON *value)
{
    cJSON *parent;
    char key[64];
    int index;
    cJSON *it = at_path(root, path, &parent, key, &index);
    if (!it)
        fail_msg("no item at %s", path);
    if (index >= 0) {
        if (value)
            cJSON_ReplaceItemInArray(parent, index, value);
        else
            cJSON_DeleteItemFromArray(parent, index);
    } else {
        if (value)
            cJSON_ReplaceItemInObjectCaseSensitive(parent, key, value);
        else
            cJSON_DeleteItemFromObjectCaseSensitive(parent, key);
    }
}

/* Parse text; assert the code and that err names the file and each of up
   to two phrases. */
static void expect(const char *text, size_t len, int code, const char *p1,
                   const char *p2)
{
    char err[MB_ERR_LEN] = "";
    mb_shape_model *m = NULL;
    int rc = mb_model_parse(text, len, NAME, &m, err);
    if (rc != code)
        fail_msg("expected %d (%s), got %d: %s", code, mb_strerror(code), rc,
                 err);
    assert_null(m);
    if (strncmp(err, NAME ": ", strlen(NAME) + 2) != 0)
        fail_msg("sentence does not start with the file name: %s", err);
    if (p1 && !strstr(err, p1))
        fail_msg("sentence lacks \"%s\": %s", p1, err);
    if (p2 && !strstr(err, p2))
        fail_msg("sentence lacks \"%s\": %s", p2, err);
}

/* Edit a valid document, re-stamp its checksum, and expect. */
static void expect_edit(const char *path, cJSON *value, int code,
                        const char *p1, const char *p2)
{
    cJSON *root = valid_doc();
    edit(root, path, value);
    char *text = mb_test_model_stamp(root, 0);
    assert_non_null(text);
    expect(text, strlen(text), code, p1, p2);
    free(text);
    cJSON_Delete(root);
}

static void test_stamp_helper_agrees(void **state)
{
    /* The unedited document re-stamped by the test helper loads, in lower
       and upper case hex, and re-indenting (compact print) keeps it valid:
       the checksum rule in model_file.h is what the loader checks. */
    for (int upper = 0; upper < 2; upper++) {
        cJSON *root = valid_doc();
        char *text = mb_test_model_stamp(root, upper);
        char *compact = cJSON_PrintUnformatted(root);
        char err[MB_ERR_LEN] = "";
        mb_shape_model *m = NULL;
        assert_int_equal(mb_model_parse(text, strlen(text), NAME, &m, err), 0);
        mb_shape_model_close(m);
        m = NULL;
        assert_int_equal(
            mb_model_parse(compact, strlen(compact), NAME, &m, err), 0);
        mb_shape_model_close(m);
        free(text);
        cJSON_free(compact);
        cJSON_Delete(root);
    }
}

/* ---- unreadable, truncated, corrupt ---- */

static void test_missing_file(void **state)
{
    char path[128], err[MB_ERR_LEN] = "";
    mb_shape_model *m = NULL;
    scratch_path(path, sizeof path, "absent.json");
    assert_int_equal(mb_model_load(path, &m, err), MB_ENOTFOUND);
    assert_null(m);
    assert_non_null(strstr(err, path));
    /* A folder is not a model file. */
    assert_int_equal(mb_model_load(scratch, &m, err), MB_EIO);
    assert_non_null(strstr(err, scratch));
}

static void test_truncated(void **state)
{
    cJSON *root = valid_doc();
    char *text = mb_test_model_stamp(root, 0);
    size_t len = strlen(text);
    const char *close = strrchr(text, '}');
    size_t last = (size_t)(close - text);
    /* Every cut before the final brace is refused as malformed, never
       loaded and never a crash; 400 cuts across the file. */
    for (int i = 0; i < 400; i++) {
        size_t cut = (size_t)i * last / 400;
        char err[MB_ERR_LEN] = "";
        mb_shape_model *m = NULL;
        int rc = mb_model_parse(text, cut, NAME, &m, err);
        if (rc != MB_EFORMAT)
            fail_msg("cut at %zu of %zu: got %d: %s", cut, len, rc, err);
        assert_non_null(strstr(err, NAME));
    }
    expect(text, last - 3, MB_EFORMAT, "ends early", NULL);
    expect(text, 0, MB_EFORMAT, "empty", NULL);
    free(text);
    cJSON_Delete(root);
}

static void test_corrupt(void **state)
{
    cJSON *root = valid_doc();
    char *text = mb_test_model_stamp(root, 0);
    size_t len = strlen(text);
    /* A colon turned into garbage on line 2. */
    char *colon = strchr(text, ':');
    *colon = '@';
    expect(text, len, MB_EFORMAT, "not valid JSON at line 2", NULL);
    *colon = ':';
    /* Text after the document. */
    char *more = malloc(len + 8);
    memcpy(more, text, len);
    memcpy(more + len, "\n}junk", 7);
    expect(more, len + 6, MB_EFORMAT, "after the JSON document", NULL);
    free(more);
    free(text);
    cJSON_Delete(root);
    expect("[1, 2, 3]", 9, MB_EFORMAT, "expected a JSON object", NULL);
}

/* ---- format, version, checksum ---- */

static void test_format_and_version(void **state)
{
    expect_edit("format", cJSON_CreateString("modeband-points"), MB_EVERSION,
                "format", "modeband-model");
    expect_edit("format", NULL, MB_EFORMAT, "format: missing", NULL);
    expect_edit("version", cJSON_CreateNumber(2), MB_EVERSION,
                "found version 2", "only version 1");
    expect_edit("version", cJSON_CreateNumber(0), MB_EVERSION,
                "found version 0", "only version 1");
    expect_edit("version", cJSON_CreateString("1"), MB_EFORMAT,
                "version: expected an integer", NULL);
    expect_edit("version", cJSON_CreateNumber(1.5), MB_EFORMAT, "version",
                NULL);
    expect_edit("version", NULL, MB_EFORMAT, "version: missing", NULL);
}

static void test_checksum(void **state)
{
    /* A value changed after stamping: the checksum catches it. */
    cJSON *root = valid_doc();
    char *text = mb_test_model_stamp(root, 0);
    cJSON_Delete(root);
    root = cJSON_Parse(text);
    rawify(root);
    free(text);
    edit(root, "payload.shape.eigenvalues[1]", cJSON_CreateNumber(12.5));
    text = cJSON_Print(root);
    expect(text, strlen(text), MB_ECHECKSUM, "checksum", "changed or damaged");
    cJSON_free(text);
    /* Malformed and missing checksums. */
    edit(root, "checksum", cJSON_CreateString("crc32:12345"));
    text = cJSON_Print(root);
    expect(text, strlen(text), MB_EFORMAT, "checksum: expected", "8 hex");
    cJSON_free(text);
    edit(root, "checksum", cJSON_CreateString("md5:0123456789abcdef"));
    text = cJSON_Print(root);
    expect(text, strlen(text), MB_EFORMAT, "checksum", NULL);
    cJSON_free(text);
    edit(root, "checksum", cJSON_CreateNumber(5));
    text = cJSON_Print(root);
    expect(text, strlen(text), MB_EFORMAT, "checksum: expected a string", NULL);
    cJSON_free(text);
    edit(root, "checksum", NULL);
    text = cJSON_Print(root);
    expect(text, strlen(text), MB_EFORMAT, "checksum: missing", NULL);
    cJSON_free(text);
    cJSON_Delete(root);
}

/* ---- sizes ---- */

static void test_sizes(void **state)
{
    expect_edit("payload.shape.mean[3]", NULL, MB_ESIZE, "payload.shape.mean",
                "expected dim = 40 numbers, found 39");
    expect_edit("payload.shape.dim", cJSON_CreateNumber(42), MB_ESIZE,
                "payload.shape.dim", "42");
    /* Layout sum no longer matches dim. */
    expect_edit("payload.layout.outlines[1]", cJSON_CreateNumber(T_N1 + 1),
                MB_ESIZE, "payload.shape.dim", "2 x 21 points");
    expect_edit("payload.shape.vectors[2]", NULL, MB_ESIZE,
                "payload.shape.vectors", "modes = 3 arrays, found 2");
    expect_edit("payload.shape.modes", cJSON_CreateNumber(2), MB_ESIZE,
                "payload.shape.vectors", NULL);
    expect_edit("payload.shape.vectors[1][0]", NULL, MB_ESIZE,
                "payload.shape.vectors[1]", "found 39");
    /* Fewer eigenvalues than modes. */
    cJSON *few = cJSON_CreateArray();
    cJSON_AddItemToArray(few, cJSON_CreateNumber(3));
    cJSON_AddItemToArray(few, cJSON_CreateNumber(2));
    expect_edit("payload.shape.eigenvalues", few, MB_ESIZE,
                "payload.shape.eigenvalues", "found 2");
}

/* ---- numbers ---- */

static void test_non_finite(void **state)
{
    expect_edit("payload.shape.mean[17]", cJSON_CreateNull(), MB_ENUMERIC,
                "payload.shape.mean[17]: expected a finite number",
                "found null");
    expect_edit("payload.shape.vectors[0][3]", cJSON_CreateRaw("1e999"),
                MB_ENUMERIC, "payload.shape.vectors[0][3]", "infinite");
    expect_edit("payload.shape.eigenvalues[0]", cJSON_CreateRaw("-1e999"),
                MB_ENUMERIC, "payload.shape.eigenvalues[0]", NULL);
    expect_edit("payload.training.variance_fraction", cJSON_CreateNull(),
                MB_ENUMERIC, "payload.training.variance_fraction", "null");
    expect_edit("payload.shape.mean[2]", cJSON_CreateString("0.5"), MB_EFORMAT,
                "payload.shape.mean[2]", "a string");
    /* NaN is not JSON at all. */
    cJSON *root = valid_doc();
    edit(root, "payload.shape.mean[1]", cJSON_CreateRaw("NaN"));
    char *text = cJSON_Print(root);
    expect(text, strlen(text), MB_EFORMAT, "not valid JSON", NULL);
    cJSON_free(text);
    cJSON_Delete(root);
}

/* ---- missing and mistyped fields ---- */

static void test_missing_fields(void **state)
{
    static const char *const fields[] = {
        "payload.training",
        "payload.training.samples",
        "payload.training.gpa_iterations",
        "payload.training.gpa_converged",
        "payload.training.variance_fraction",
        "payload.training.fixed_modes",
        "payload.training.created",
        "payload.training.source",
        "payload.layout",
        "payload.layout.outlines",
        "payload.shape",
        "payload.shape.dim",
        "payload.shape.modes",
        "payload.shape.mean",
        "payload.shape.eigenvalues",
        "payload.shape.vectors",
    };
    for (size_t i = 0; i < sizeof fields / sizeof fields[0]; i++) {
        char phrase[160];
        snprintf(phrase, sizeof phrase, "%s: missing", fields[i]);
        expect_edit(fields[i], NULL, MB_EFORMAT, phrase, NULL);
    }
    /* Without a payload there is nothing to check the checksum on. */
    cJSON *root = valid_doc();
    edit(root, "payload", NULL);
    char *text = cJSON_Print(root);
    expect(text, strlen(text), MB_EFORMAT, "payload: missing", NULL);
    cJSON_free(text);
    cJSON_Delete(root);
}

static void test_mistyped_fields(void **state)
{
    expect_edit("payload.training.gpa_converged", cJSON_CreateNumber(1),
                MB_EFORMAT, "gpa_converged: expected true or false", NULL);
    expect_edit("payload.training.samples", cJSON_CreateNumber(2.5), MB_EFORMAT,
                "payload.training.samples: expected an integer", "2.5");
    expect_edit("payload.training.samples", cJSON_CreateString("30"),
                MB_EFORMAT, "payload.training.samples", "a string");
    expect_edit("payload.training.samples", cJSON_CreateNumber(-1), MB_EFORMAT,
                "payload.training.samples", NULL);
    expect_edit("payload.training.variance_fraction", cJSON_CreateNumber(1.5),
                MB_EFORMAT, "variance_fraction: expected a number from 0 to 1",
                NULL);
    expect_edit("payload.training.created",
                cJSON_CreateString("2024-05-01T12:00:00Z and far too long"),
                MB_EFORMAT, "payload.training.created", "at most 31 bytes");
    expect_edit("payload.layout.outlines[0]", cJSON_CreateNumber(2), MB_EFORMAT,
                "payload.layout.outlines[0]", "from 3 to 8192");
    expect_edit("payload.layout.outlines", cJSON_CreateArray(), MB_EFORMAT,
                "payload.layout.outlines", "found 0");
    expect_edit("payload.shape.mean", cJSON_CreateObject(), MB_EFORMAT,
                "payload.shape.mean: expected an array", NULL);
    expect_edit("payload.shape.vectors[0]", cJSON_CreateNumber(1), MB_EFORMAT,
                "payload.shape.vectors[0]: expected an array", NULL);
    expect_edit("payload.shape.modes", cJSON_CreateNumber(0), MB_EFORMAT,
                "payload.shape.modes", NULL);
    expect_edit("payload.shape", cJSON_CreateArray(), MB_EFORMAT,
                "payload.shape: expected an object", NULL);
}

/* Values every check above passes but the model itself refuses. */
static void test_model_refuses(void **state)
{
    /* Eigenvalues out of order. */
    cJSON *root = valid_doc();
    edit(root, "payload.shape.eigenvalues[0]", cJSON_CreateNumber(1.0));
    char *text = mb_test_model_stamp(root, 0);
    char err[MB_ERR_LEN] = "";
    mb_shape_model *m = NULL;
    int rc = mb_model_parse(text, strlen(text), NAME, &m, err);
    assert_true(rc < 0);
    assert_null(m);
    assert_non_null(strstr(err, NAME ": payload.shape: "));
    free(text);
    cJSON_Delete(root);
    /* A mode that is not of unit length. */
    root = valid_doc();
    cJSON *v = at_path(root, "payload.shape.vectors[0][0]", &(cJSON *){NULL},
                       (char[64]){0}, &(int){0});
    double x = strtod(v->valuestring, NULL);
    char raw[64];
    snprintf(raw, sizeof raw, "%.17g", x + 0.5);
    edit(root, "payload.shape.vectors[0][0]", cJSON_CreateRaw(raw));
    text = mb_test_model_stamp(root, 0);
    rc = mb_model_parse(text, strlen(text), NAME, &m, err);
    assert_true(rc < 0);
    assert_null(m);
    assert_non_null(strstr(err, NAME ": payload.shape: "));
    free(text);
    cJSON_Delete(root);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_crc32_check_value),
        cmocka_unit_test(test_round_trip_bit_exact),
        cmocka_unit_test(test_format_double_exact),
        cmocka_unit_test(test_save_replaces_and_reports),
        cmocka_unit_test(test_stamp_helper_agrees),
        cmocka_unit_test(test_missing_file),
        cmocka_unit_test(test_truncated),
        cmocka_unit_test(test_corrupt),
        cmocka_unit_test(test_format_and_version),
        cmocka_unit_test(test_checksum),
        cmocka_unit_test(test_sizes),
        cmocka_unit_test(test_non_finite),
        cmocka_unit_test(test_missing_fields),
        cmocka_unit_test(test_mistyped_fields),
        cmocka_unit_test(test_model_refuses),
    };
    return cmocka_run_group_tests(tests, setup_scratch, teardown_scratch);
}
