/*
 * test_model.c — the model file: SHA-256, exact round trip, atomic never-overwriting
 * writes, refusal of corrupt / truncated / edited / newer files, and evaluation of the
 * bands against the textbook formula for a straight line.
 *
 * Sources of truth: FIPS 180-4 example vectors (NIST), Python's hashlib
 * (/usr/bin/python3), the closed-form confidence and prediction bands of simple linear
 * regression (e.g. Montgomery & Runger, Applied Statistics and Probability for
 * Engineers, §11-7; Draper & Smith, Applied Regression Analysis, ch. 1 — from memory),
 * Student t quantile t(0.975, 8) = 2.306004135 (printed t tables; checked with
 * scipy.stats.t.ppf). All files go to a fresh directory under the build tree.
 */
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <float.h>
#include <math.h>
#include <setjmp.h>
#include <signal.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>
#include <cmocka.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <jansson.h>

#include "stagecal/model.h"
#include "stagecal/regress.h"
#include "internal_sha256.h"
#include "testutil.h"

static char workdir[1024];

/* ---- helpers ------------------------------------------------------------------------ */

static void rm_tree(const char *path)
{
    DIR *d = opendir(path);
    if (d) {
        struct dirent *e;
        while ((e = readdir(d)) != NULL) {
            char sub[2048];
            if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0)
                continue;
            snprintf(sub, sizeof sub, "%s/%s", path, e->d_name);
            rm_tree(sub);
        }
        closedir(d);
        rmdir(path);
    } else {
        unlink(path);
    }
}

/* Number of entries in dir (excluding . and ..); -1 when it cannot be opened. */
static int count_entries(const char *dir)
{
    DIR *d = opendir(dir);
    int n = 0;
    struct dirent *e;
    if (!d)
        return -1;
    while ((e = readdir(d)) != NULL)
        if (strcmp(e->d_name, ".") != 0 && strcmp(e->d_name, "..") != 0)
            n++;
    closedir(d);
    return n;
}

static char *slurp(const char *path, size_t *len)
{
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    fseek(fp, 0, SEEK_END);
    long n = ftell(fp);
    fseek(fp, 0, SEEK_SET);
    char *buf = malloc((size_t)n + 1);
    assert_non_null(buf);
    assert_int_equal(fread(buf, 1, (size_t)n, fp), (size_t)n);
    buf[n] = '\0';
    fclose(fp);
    if (len)
        *len = (size_t)n;
    return buf;
}

static void spit(const char *path, const char *text, size_t len)
{
    FILE *fp = fopen(path, "wb");
    assert_non_null(fp);
    assert_int_equal(fwrite(text, 1, len, fp), len);
    assert_int_equal(fclose(fp), 0);
}

static void subdir(char *out, size_t cap, const char *name)
{
    snprintf(out, cap, "%s/%s", workdir, name);
}

/* A model with every field set to "high-entropy" values (GSL design notes). */
static void fill_model(stagecal_model *m, const char *form_name)
{
    stagecal_error err;
    stagecal_model_init(m);
    snprintf(m->column_id, sizeof m->column_id, "K-17.demo");
    snprintf(m->light, sizeof m->light, "ethanol");
    snprintf(m->heavy, sizeof m->heavy, "water");
    snprintf(m->vle_kind, sizeof m->vle_kind, "nrtl");
    const double tau[] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    const double a = 2.385;
    assert_int_equal(stagecal_model_add_vle_param(m, "nrtl", tau, 5, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_add_vle_param(m, "p_pa", &a, 1, &err), STAGECAL_OK);
    /* the optional physical data, values with no short binary form */
    m->latent_j_mol = 38752.123456789012;
    m->m_light_kg_mol = 0.046068440000000001;
    m->m_heavy_kg_mol = 0.018015280000000001;
    m->condenser = STAGECAL_CONDENSER_PARTIAL;
    assert_int_equal(stagecal_form_parse(form_name, &m->form, &err), STAGECAL_OK);
    size_t p = m->form.p;
    for (size_t i = 0; i < p; i++) {
        m->theta[i] = 7.123456789012345 / (double)(i + 1) - 0.1;
        for (size_t j = 0; j <= i; j++) {
            /* diagonally dominant, symmetric, values with no short decimal form */
            double v = i == j ? 0.3 + 0.01 * (double)i : 1.0 / (3.0 + (double)(i + j));
            m->cov[i * p + j] = m->cov[j * p + i] = v * 1e-2;
        }
    }
    m->theta[0] = 0.1; /* 0.1 has no exact binary form: a good round-trip probe */
    m->sigma = 0.41234567890123456;
    m->dof = 37.5;
    m->level = 0.9;
    m->method = STAGECAL_MODEL_COMPOSITION_SPACE;
    m->n_windows = 41;
    m->n_samples = 523417;
    m->n_runs = 9;
    m->r_min = 1.0 / 3.0;
    m->r_max = INFINITY;
    m->has_load = 1;
    m->f_min = 0.61;
    m->f_max = 2.2360679774997898;
    assert_int_equal(stagecal_model_add_input(m, "datasets/demo/run-1.csv",
                                              "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410"
                                              "ff61f20015ad",
                                              1440, &err),
                     STAGECAL_OK);
    assert_int_equal(stagecal_model_add_input(m, "caf\xc3\xa9/run \"2\".csv",
                                              "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca4"
                                              "95991b7852b855",
                                              0, &err),
                     STAGECAL_OK);
    snprintf(m->fitted_utc, sizeof m->fitted_utc, "2026-11-30T08:15:42Z");
    m->seed = 9007199254740993ull; /* 2^53 + 1: would not survive a trip through double */
    assert_int_equal(stagecal_model_set_command_line(m,
                                                     "stagecal calibrate --column k17.json "
                                                     "run-1.csv",
                                                     &err),
                     STAGECAL_OK);
    m->has_hetp = 1;
    m->height_m = 3.05;
    m->hetp_r = INFINITY;
    m->hetp_f = 1.37;
    m->hetp_m = 0.2914;
    m->hetp_low_m = 5e-324; /* smallest subnormal double */
    m->hetp_high_m = INFINITY;
    m->hetp_level = 0.95;
    assert_int_equal(stagecal_model_add_warning(m, "3 windows near a pinch were dropped", &err),
                     STAGECAL_OK);
    assert_int_equal(stagecal_model_add_warning(m, "", &err), STAGECAL_OK);
}

static void bits_equal(double a, double b, const char *what)
{
    if (memcmp(&a, &b, sizeof a) != 0) {
        print_error("%s: %.17g and %.17g differ in their bits\n", what, a, b);
        fail();
    }
}

static void assert_models_equal(const stagecal_model *a, const stagecal_model *b)
{
    assert_string_equal(a->column_id, b->column_id);
    assert_string_equal(a->light, b->light);
    assert_string_equal(a->heavy, b->heavy);
    assert_string_equal(a->vle_kind, b->vle_kind);
    bits_equal(a->latent_j_mol, b->latent_j_mol, "latent_j_mol");
    bits_equal(a->m_light_kg_mol, b->m_light_kg_mol, "m_light_kg_mol");
    bits_equal(a->m_heavy_kg_mol, b->m_heavy_kg_mol, "m_heavy_kg_mol");
    assert_int_equal(a->n_vle_params, b->n_vle_params);
    for (size_t i = 0; i < a->n_vle_params; i++) {
        /* the file stores the parameters object with sorted keys; find by name */
        const stagecal_model_vle_param *pa = &a->vle_params[i], *pb = NULL;
        for (size_t j = 0; j < b->n_vle_params; j++)
            if (strcmp(b->vle_params[j].name, pa->name) == 0)
                pb = &b->vle_params[j];
        assert_non_null(pb);
        assert_int_equal(pa->n, pb->n);
        for (size_t j = 0; j < pa->n; j++)
            bits_equal(pa->values[j], pb->values[j], pa->name);
    }
    assert_int_equal(a->condenser, b->condenser);
    assert_string_equal(a->form.name, b->form.name);
    assert_int_equal(a->form.p, b->form.p);
    for (size_t i = 0; i < a->form.p; i++) {
        bits_equal(a->theta[i], b->theta[i], "theta");
        for (size_t j = 0; j < a->form.p; j++)
            bits_equal(a->cov[i * a->form.p + j], b->cov[i * b->form.p + j], "cov");
    }
    bits_equal(a->sigma, b->sigma, "sigma");
    bits_equal(a->dof, b->dof, "dof");
    bits_equal(a->level, b->level, "level");
    assert_int_equal(a->method, b->method);
    assert_int_equal(a->n_windows, b->n_windows);
    assert_int_equal(a->n_samples, b->n_samples);
    assert_int_equal(a->n_runs, b->n_runs);
    bits_equal(a->r_min, b->r_min, "r_min");
    bits_equal(a->r_max, b->r_max, "r_max");
    assert_int_equal(a->has_load, b->has_load);
    bits_equal(a->f_min, b->f_min, "f_min");
    bits_equal(a->f_max, b->f_max, "f_max");
    assert_int_equal(a->n_inputs, b->n_inputs);
    for (size_t i = 0; i < a->n_inputs; i++) {
        assert_string_equal(a->inputs[i].path, b->inputs[i].path);
        assert_string_equal(a->inputs[i].sha256, b->inputs[i].sha256);
        assert_int_equal(a->inputs[i].rows, b->inputs[i].rows);
    }
    assert_string_equal(a->fitted_utc, b->fitted_utc);
    assert_string_equal(a->tool_version, b->tool_version);
    assert_true(a->seed == b->seed);
    assert_true((a->command_line == NULL) == (b->command_line == NULL));
    if (a->command_line)
        assert_string_equal(a->command_line, b->command_line);
    assert_int_equal(a->has_hetp, b->has_hetp);
    bits_equal(a->height_m, b->height_m, "height_m");
    bits_equal(a->hetp_r, b->hetp_r, "hetp_r");
    bits_equal(a->hetp_f, b->hetp_f, "hetp_f");
    bits_equal(a->hetp_m, b->hetp_m, "hetp_m");
    bits_equal(a->hetp_low_m, b->hetp_low_m, "hetp_low_m");
    bits_equal(a->hetp_high_m, b->hetp_high_m, "hetp_high_m");
    bits_equal(a->hetp_level, b->hetp_level, "hetp_level");
    assert_int_equal(a->n_design, b->n_design);
    for (size_t i = 0; i < a->n_design * a->form.p; i++)
        bits_equal(a->design[i], b->design[i], "design");
    assert_int_equal(a->n_warnings, b->n_warnings);
    for (size_t i = 0; i < a->n_warnings; i++)
        assert_string_equal(a->warnings[i], b->warnings[i]);
}

/* Rewrites a model file after edit() changed its JSON, with a fresh, valid checksum, so
 * that the validation behind the checksum can be provoked. The canonical text is the
 * one docs/model-file.md defines. */
static void rewrite_with_checksum(const char *path, void (*edit)(json_t *doc))
{
    json_error_t jerr;
    char hex[SHA256_HEX];
    json_t *doc = json_load_file(path, 0, &jerr);
    assert_non_null(doc);
    edit(doc);
    json_object_del(doc, "checksum");
    char *canon = json_dumps(doc, JSON_COMPACT | JSON_SORT_KEYS | JSON_ENSURE_ASCII |
                                      JSON_REAL_PRECISION(17));
    assert_non_null(canon);
    sha256_hex(canon, strlen(canon), hex);
    free(canon);
    json_object_set_new(doc, "checksum",
                        json_pack("{s:s, s:s}", "algorithm", "sha256", "value", hex));
    assert_int_equal(json_dump_file(doc, path, JSON_INDENT(2) | JSON_REAL_PRECISION(17)), 0);
    json_decref(doc);
}

/* Writes the standard model into dir; returns its path in out. */
static void write_standard(const char *dir, const char *form, char *out, size_t cap)
{
    stagecal_model m;
    stagecal_error err;
    fill_model(&m, form);
    int rc = stagecal_model_write(&m, dir, out, cap, &err);
    if (rc != STAGECAL_OK)
        print_error("write: %s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    stagecal_model_free(&m);
}

static void expect_load_error(const char *path, int code, const char *want)
{
    stagecal_model m;
    stagecal_error err;
    stagecal_model_init(&m);
    int rc = stagecal_model_load(path, &m, &err);
    if (rc != code || strcmp(err.text, want) != 0)
        print_error("load %s: got %d '%s'\n          want %d '%s'\n", path, rc, err.text, code,
                    want);
    assert_int_equal(rc, code);
    assert_string_equal(err.text, want);
    /* a refused file leaves the model empty */
    assert_int_equal(m.n_inputs, 0);
    assert_int_equal(m.form.p, 0);
    stagecal_model_free(&m);
}

/* ---- SHA-256 ------------------------------------------------------------------------ */

static void model_sha256_fips_vectors(void **state)
{
    (void)state;
    char hex[SHA256_HEX];
    /* FIPS 180-4 examples (NIST, "SHA256.pdf" example values; also FIPS 180-2 App. B) */
    sha256_hex("abc", 3, hex);
    assert_string_equal(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    sha256_hex("", 0, hex);
    assert_string_equal(hex, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
    const char *m448 = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
    assert_int_equal(strlen(m448) * 8, 448);
    sha256_hex(m448, strlen(m448), hex);
    assert_string_equal(hex, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
    /* one million 'a' (FIPS 180-2 App. B.3), fed in uneven pieces to exercise buffering */
    sha256_ctx c;
    unsigned char d[SHA256_DIGEST], chunk[997];
    memset(chunk, 'a', sizeof chunk);
    sha256_init(&c);
    size_t left = 1000000;
    for (size_t k = 1; left > 0; k = k % 997 + 1) {
        size_t take = k < left ? k : left;
        sha256_update(&c, chunk, take);
        left -= take;
    }
    sha256_final(&c, d);
    sha256_to_hex(d, hex);
    assert_string_equal(hex, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

/* Every length 0..200 (all padding cases around 55/56/64 bytes) against hashlib. */
static void model_sha256_matches_hashlib(void **state)
{
    (void)state;
    const char *cmd = STAGECAL_PYTHON " -c \"import hashlib\n"
                                      "for n in range(201):\n"
                                      "    print(hashlib.sha256(bytes((7*i+3)%256 for i in "
                                      "range(n))).hexdigest())\"";
    FILE *pp = popen(cmd, "r");
    assert_non_null(pp);
    unsigned char msg[200];
    for (size_t i = 0; i < sizeof msg; i++)
        msg[i] = (unsigned char)((7 * i + 3) % 256);
    char line[128], hex[SHA256_HEX];
    size_t n = 0;
    while (fgets(line, sizeof line, pp)) {
        line[strcspn(line, "\n")] = '\0';
        sha256_hex(msg, n, hex);
        if (strcmp(hex, line) != 0)
            print_error("length %zu: %s != hashlib %s\n", n, hex, line);
        assert_string_equal(hex, line);
        n++;
    }
    assert_int_equal(pclose(pp), 0);
    assert_int_equal(n, 201);
}

/* The checksum's canonical text, re-implemented in Python from docs/model-file.md (json +
 * hashlib, not jansson): a third party can verify a model file without our code. */
static const char canon_py[] =
    "import hashlib, json, sys\n"
    "\n"
    "def canon(v):\n"
    "    if v is None: return \"null\"\n"
    "    if v is True: return \"true\"\n"
    "    if v is False: return \"false\"\n"
    "    if isinstance(v, int): return str(v)\n"
    "    if isinstance(v, float):\n"
    "        t = \"%.17g\" % v\n"
    "        if \"e\" in t:  # jansson: no '+', no leading zeros (1e-5, 1.5e20)\n"
    "            m, e = t.split(\"e\")\n"
    "            t = m + \"e\" + str(int(e))\n"
    "        return t if any(c in t for c in \".eE\") else t + \".0\"\n"
    "    if isinstance(v, str):\n"
    "        out = []\n"
    "        for ch in v:\n"
    "            o = ord(ch)\n"
    "            if ch == '\"': out.append('\\\\\"')\n"
    "            elif ch == '\\\\': out.append('\\\\\\\\')\n"
    "            elif ch == '\\b': out.append('\\\\b')\n"
    "            elif ch == '\\f': out.append('\\\\f')\n"
    "            elif ch == '\\n': out.append('\\\\n')\n"
    "            elif ch == '\\r': out.append('\\\\r')\n"
    "            elif ch == '\\t': out.append('\\\\t')\n"
    "            elif o < 0x20 or o >= 0x7f:\n"
    "                if o > 0xffff:\n"
    "                    o -= 0x10000\n"
    "                    out.append('\\\\u%04X\\\\u%04X' % (0xd800 | (o >> 10), 0xdc00 | (o & "
    "0x3ff)))\n"
    "                else:\n"
    "                    out.append('\\\\u%04X' % o)\n"
    "            else: out.append(ch)\n"
    "        return '\"' + \"\".join(out) + '\"'\n"
    "    if isinstance(v, list): return \"[\" + \",\".join(canon(x) for x in v) + \"]\"\n"
    "    return \"{\" + \",\".join(canon(k) + \":\" + canon(v[k]) for k in sorted(v)) + \"}\"\n"
    "\n"
    "doc = json.load(open(sys.argv[1], encoding=\"utf-8\"))\n"
    "want = doc.pop(\"checksum\")[\"value\"]\n"
    "got = hashlib.sha256(canon(doc).encode(\"ascii\")).hexdigest()\n"
    "print(\"ok\" if got == want else \"mismatch \" + got)\n"
    "\n";

static void model_checksum_verifiable_in_python(void **state)
{
    (void)state;
    char dir[1100], path[1200], script[1100], cmd[2600], line[256];
    subdir(dir, sizeof dir, "python");
    /* holds "caf\u00e9", quotes, and reals with two-digit negative and positive exponents,
     * which C's and Python's %.17g write as e-05 / e+20 and jansson as e-5 / e20 */
    {
        stagecal_model m;
        stagecal_error err;
        fill_model(&m, "saturating-load");
        for (size_t k = 0; k < m.form.p * m.form.p; k++)
            m.cov[k] *= 1e-6; /* still a covariance */
        m.sigma = 1.25e-7;
        m.r_max = 1.5e20;
        /* and a design (version 3): 6 rows of 4 arbitrary doubles from 5e-5 to 4e2 (full
         * rank, largest leverage 0.98) */
        double x[6 * 4];
        for (size_t i = 0; i < 6 * 4; i++)
            x[i] = (fmod(0.6180339887498949 * (double)((i + 1) * (i + 1)), 1.0) - 0.5) *
                   pow(10.0, 2.0 * (double)(i % 4) - 3.0);
        assert_int_equal(stagecal_model_set_design(&m, x, 6, &err), STAGECAL_OK);
        int rc = stagecal_model_write(&m, dir, path, sizeof path, &err);
        if (rc != STAGECAL_OK)
            print_error("write: %s\n", err.text);
        assert_int_equal(rc, STAGECAL_OK);
        stagecal_model_free(&m);
        size_t n;
        char *text = slurp(path, &n);
        assert_non_null(strstr(text, "e-7")); /* the case the script must handle */
        assert_null(strstr(text, "e-0"));     /* jansson never pads the exponent */
        free(text);
    }
    subdir(script, sizeof script, "checksum.py");
    spit(script, canon_py, strlen(canon_py));
    snprintf(cmd, sizeof cmd, "%s '%s' '%s'", STAGECAL_PYTHON, script, path);
    FILE *pp = popen(cmd, "r");
    assert_non_null(pp);
    assert_non_null(fgets(line, sizeof line, pp));
    assert_int_equal(pclose(pp), 0);
    assert_string_equal(line, "ok\n");
}

static void model_hash_file_matches_fips(void **state)
{
    (void)state;
    char path[1100], hex[STAGECAL_MODEL_HEX];
    stagecal_error err;
    subdir(path, sizeof path, "abc.txt");
    spit(path, "abc", 3);
    assert_int_equal(stagecal_model_hash_file(path, hex, &err), STAGECAL_OK);
    /* FIPS 180-4 example "abc" */
    assert_string_equal(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    subdir(path, sizeof path, "no-such-file.csv");
    assert_int_equal(stagecal_model_hash_file(path, hex, &err), STAGECAL_ENOINPUT);
}

/* ---- writing and reading ----------------------------------------------------------- */

static void model_roundtrip_exact(void **state)
{
    (void)state;
    char dir[1100], path[1200];
    stagecal_model m, back;
    stagecal_error err;
    subdir(dir, sizeof dir, "fits/K-17.demo");
    const char *forms[] = {"saturating-load", "linear:1+1/R+F", "constant"};
    for (size_t k = 0; k < 3; k++) {
        fill_model(&m, forms[k]);
        if (k == 2) { /* the other branches: no load, no HETP, no command line, total,
                       * no latent heat or molar masses */
            m.latent_j_mol = m.m_light_kg_mol = m.m_heavy_kg_mol = 0;
            m.has_load = 0;
            m.has_hetp = 0;
            m.condenser = STAGECAL_CONDENSER_TOTAL;
            m.r_max = 6.25;
            m.method = STAGECAL_MODEL_STAGE_SPACE;
            m.hetp_r = m.hetp_f = m.hetp_m = m.hetp_low_m = m.hetp_high_m = m.hetp_level = 0;
            m.height_m = m.f_min = m.f_max = 0;
            assert_int_equal(stagecal_model_set_command_line(&m, NULL, &err), STAGECAL_OK);
        }
        if (k == 1) { /* a design (format version 3): rows of 1, 1/R, F, bits kept */
            const double x[] = {1,   1 / 1.5, 1.1, 1,    0.5, 1.7,     1,  0.4,
                                1.2, 1,       0.2, 2.05, 1,   1 / 3.0, 1.4};
            assert_int_equal(stagecal_model_set_design(&m, x, 5, &err), STAGECAL_OK);
        }
        int rc = stagecal_model_write(&m, dir, path, sizeof path, &err);
        if (rc)
            print_error("%s\n", err.text);
        assert_int_equal(rc, STAGECAL_OK);
        stagecal_model_init(&back);
        rc = stagecal_model_load(path, &back, &err);
        if (rc)
            print_error("%s\n", err.text);
        assert_int_equal(rc, STAGECAL_OK);
        assert_models_equal(&m, &back);
        size_t len;
        char *text = slurp(path, &len);
        assert_non_null(strstr(text, k == 1 ? "\"version\": 3" : "\"version\": 1"));
        free(text);
        stagecal_model_free(&back);
        stagecal_model_free(&m);
    }
}

/* The latent heat and molar masses are optional members of "system" (docs/model-file.md):
 * written only when recorded (not as 0 or null), and a file without them loads with 0 =
 * not recorded. The older file is tests/badinput/model_good.json, written by stagecal
 * before these members existed (same format version 1). Its provenance paths were made
 * relative later and the checksum recomputed with the Python check of docs/model-file.md,
 * not with this code, so loading it also shows that the canonical text of a file without
 * them did not change. */
static void model_system_data_optional(void **state)
{
    (void)state;
    static const char *const keys[] = {"latent_heat_j_mol", "molar_mass_light_kg_mol",
                                       "molar_mass_heavy_kg_mol"};
    char dir[1100], path[1200];
    stagecal_model m;
    stagecal_error err;
    size_t n;
    subdir(dir, sizeof dir, "system-data");

    /* recorded: the three members are in the file under "system" */
    write_standard(dir, "saturating", path, sizeof path);
    json_error_t jerr;
    json_t *doc = json_load_file(path, 0, &jerr);
    assert_non_null(doc);
    json_t *sys = json_object_get(doc, "system");
    /* values as fill_model set them; the file holds them with 17 digits */
    bits_equal(json_real_value(json_object_get(sys, keys[0])), 38752.123456789012, keys[0]);
    bits_equal(json_real_value(json_object_get(sys, keys[1])), 0.046068440000000001, keys[1]);
    bits_equal(json_real_value(json_object_get(sys, keys[2])), 0.018015280000000001, keys[2]);
    json_decref(doc);

    /* not recorded: absent from the file, 0 after loading */
    fill_model(&m, "saturating");
    m.latent_j_mol = m.m_light_kg_mol = m.m_heavy_kg_mol = 0;
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_OK);
    stagecal_model_free(&m);
    char *text = slurp(path, &n);
    for (size_t k = 0; k < 3; k++)
        assert_null(strstr(text, keys[k]));
    free(text);
    stagecal_model_init(&m);
    assert_int_equal(stagecal_model_load(path, &m, &err), STAGECAL_OK);
    assert_true(m.latent_j_mol == 0 && m.m_light_kg_mol == 0 && m.m_heavy_kg_mol == 0);
    stagecal_model_free(&m);

    /* an older file */
    stagecal_model_init(&m);
    int rc = stagecal_model_load(STAGECAL_TESTS_DIR "/badinput/model_good.json", &m, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    assert_string_equal(m.column_id, "demo-bt-K-7");
    assert_true(m.latent_j_mol == 0 && m.m_light_kg_mol == 0 && m.m_heavy_kg_mol == 0);
    stagecal_model_free(&m);

    /* a value JSON cannot carry as a finite number is refused by the JSON parser: a
     * non-finite value never reaches the model (the in-memory rule is checked in
     * model_check_names_each_rule) */
    static const char overflow[] = "{\"format\": \"stagecal-model\", \"version\": 1, "
                                   "\"system\": {\"latent_heat_j_mol\": 1e999}}";
    stagecal_model_init(&m);
    assert_int_equal(stagecal_model_parse(overflow, sizeof overflow - 1, "o.json", &m, &err),
                     STAGECAL_EDATA);
    assert_non_null(strstr(err.text, "o.json:1: not a valid JSON document"));
    stagecal_model_free(&m);
}

static void model_write_names_file_after_fit_time(void **state)
{
    (void)state;
    char dir[1100], path[1200], want[1200];
    subdir(dir, sizeof dir, "naming/deep/er");
    write_standard(dir, "saturating", path, sizeof path);
    snprintf(want, sizeof want, "%s/K-17.demo-20261130T081542Z.json", dir);
    assert_string_equal(path, want);
    assert_int_equal(count_entries(dir), 1); /* no temporary file left */
    struct stat st;
    mode_t mask = umask(022);
    umask(mask);
    assert_int_equal(stat(path, &st), 0);
    assert_int_equal(st.st_mode & 0777, 0644 & ~mask);
}

static void model_write_never_overwrites(void **state)
{
    (void)state;
    char dir[1100], p1[1200], p2[1200], p3[1200];
    subdir(dir, sizeof dir, "twice");
    /* Same fit time (same second) three times: three distinct files. */
    write_standard(dir, "saturating", p1, sizeof p1);
    size_t n1;
    char *before = slurp(p1, &n1);
    write_standard(dir, "saturating", p2, sizeof p2);
    write_standard(dir, "saturating", p3, sizeof p3);
    assert_string_not_equal(p1, p2);
    assert_string_not_equal(p2, p3);
    assert_non_null(strstr(p2, "-20261130T081542Z-2.json"));
    assert_non_null(strstr(p3, "-20261130T081542Z-3.json"));
    assert_int_equal(count_entries(dir), 3);
    size_t n1b;
    char *after = slurp(p1, &n1b);
    assert_int_equal(n1, n1b);
    assert_memory_equal(before, after, n1);
    free(before);
    free(after);
}

static void model_write_unwritable_is_ewrite(void **state)
{
    (void)state;
    char file[1100], dir[1200], path[1200];
    stagecal_model m;
    stagecal_error err;
    fill_model(&m, "saturating");

    /* 1. the directory cannot be created: a regular file stands in its way */
    subdir(file, sizeof file, "plainfile");
    spit(file, "x", 1);
    snprintf(dir, sizeof dir, "%s/fits/K-17", file);
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_EWRITE);
    assert_non_null(strstr(err.text, "cannot create directory"));

    /* 2. a read-only directory (permission bits do not stop root: checked only as a user) */
    subdir(dir, sizeof dir, "readonly");
    assert_int_equal(mkdir(dir, 0555), 0);
    if (geteuid() != 0) {
        assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_EWRITE);
        assert_non_null(strstr(err.text, "cannot create a file in"));
    }
    assert_int_equal(count_entries(dir), 0);

    /* 3. the disk fills up while writing (file-size limit, works for root as well): the
     * temporary file must be removed */
    subdir(dir, sizeof dir, "full");
    assert_int_equal(mkdir(dir, 0755), 0);
    struct rlimit old, small;
    assert_int_equal(getrlimit(RLIMIT_FSIZE, &old), 0);
    small = old;
    small.rlim_cur = 512; /* a model file is several kB */
    void (*prev)(int) = signal(SIGXFSZ, SIG_IGN);
    assert_int_equal(setrlimit(RLIMIT_FSIZE, &small), 0);
    int rc = stagecal_model_write(&m, dir, path, sizeof path, &err);
    assert_int_equal(setrlimit(RLIMIT_FSIZE, &old), 0);
    signal(SIGXFSZ, prev);
    assert_int_equal(rc, STAGECAL_EWRITE);
    assert_non_null(strstr(err.text, "cannot write"));
    assert_int_equal(count_entries(dir), 0);

    /* 4. the caller's buffer is too small for the path: EWRITE, nothing left behind */
    subdir(dir, sizeof dir, "smallbuf");
    char tiny[8];
    assert_int_equal(stagecal_model_write(&m, dir, tiny, sizeof tiny, &err), STAGECAL_EWRITE);
    assert_int_equal(count_entries(dir), 0);
    stagecal_model_free(&m);
}

/* A writer killed with SIGKILL at an arbitrary moment leaves only complete model files:
 * every name in the directory is a final name and loads. */
static void model_kill9_leaves_no_partial_file(void **state)
{
    (void)state;
    char dir[1100];
    stagecal_model m;
    subdir(dir, sizeof dir, "killed");
    fill_model(&m, "saturating-load");
    assert_int_equal(mkdir(dir, 0755), 0);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        for (int i = 0; i < 5000; i++)
            if (stagecal_model_write(&m, dir, NULL, 0, NULL) != STAGECAL_OK)
                _exit(3);
        _exit(0);
    }
    /* wait until the child is in full swing (bounded: 20 s at most) */
    struct timespec nap = {0, 2000000};
    for (int k = 0; k < 10000 && count_entries(dir) < 6; k++)
        nanosleep(&nap, NULL);
    assert_int_equal(kill(pid, SIGKILL), 0);
    int status;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    assert_true(WIFSIGNALED(status) || (WIFEXITED(status) && WEXITSTATUS(status) == 0));

    DIR *d = opendir(dir);
    assert_non_null(d);
    struct dirent *e;
    int files = 0;
    while ((e = readdir(d)) != NULL) {
        char path[2200];
        stagecal_model back;
        stagecal_error err;
        if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0)
            continue;
        if (strncmp(e->d_name, "K-17.demo-20261130T081542Z", 26) != 0)
            print_error("unexpected entry '%s'\n", e->d_name);
        assert_memory_equal(e->d_name, "K-17.demo-20261130T081542Z", 26);
        snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
        stagecal_model_init(&back);
        int rc = stagecal_model_load(path, &back, &err);
        if (rc)
            print_error("%s\n", err.text);
        assert_int_equal(rc, STAGECAL_OK);
        assert_models_equal(&m, &back);
        stagecal_model_free(&back);
        files++;
    }
    closedir(d);
    assert_true(files >= 6);
    print_message("kill -9 after %d complete files, no partial file\n", files);
    stagecal_model_free(&m);
}

static void model_write_refuses_invalid_model(void **state)
{
    (void)state;
    char dir[1100], path[1200];
    stagecal_model m;
    stagecal_error err;
    subdir(dir, sizeof dir, "invalid");

    fill_model(&m, "saturating");
    snprintf(m.column_id, sizeof m.column_id, "../escape");
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "column id '../escape': expected letters, digits, '_', '.', "
                                  "'-' (not starting with '.')");
    stagecal_model_free(&m);

    fill_model(&m, "saturating");
    m.sigma = NAN;
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "sigma_stages = nan: expected a finite number >= 0");
    stagecal_model_free(&m);

    fill_model(&m, "saturating");
    m.cov[1] = 1.0; /* cov[0][1] no longer equals cov[1][0] */
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "covariance is not symmetric"));
    stagecal_model_free(&m);

    fill_model(&m, "saturating");
    m.fitted_utc[10] = ' ';
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "provenance: fitted_utc '2026-11-30 08:15:42Z': expected "
                                  "YYYY-MM-DDTHH:MM:SSZ");
    stagecal_model_free(&m);

    fill_model(&m, "saturating-load");
    m.has_load = 0;
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "envelope: the form 'saturating-load' uses the F-factor but "
                                  "the envelope has no F range");
    stagecal_model_free(&m);
    assert_int_equal(count_entries(dir), -1); /* not even the directory was made */
}

static void model_load_refuses_corrupt_and_truncated(void **state)
{
    (void)state;
    char dir[1100], path[1200], want[1400];
    subdir(dir, sizeof dir, "corrupt");
    write_standard(dir, "saturating", path, sizeof path);
    size_t n;
    char *text = slurp(path, &n);

    /* truncated just after an object opens (a copy interrupted mid-file): jansson
     * reports the end of input where a member name should follow */
    char *cut = strstr(text, "\"correlation\": {");
    assert_non_null(cut);
    spit(path, text, (size_t)(cut - text) + strlen("\"correlation\": {\n"));
    stagecal_model m;
    stagecal_error err;
    stagecal_model_init(&m);
    assert_int_equal(stagecal_model_load(path, &m, &err), STAGECAL_EDATA);
    assert_true(err.line > 1);
    snprintf(want, sizeof want,
             "%s:%ld: not a valid JSON document (truncated or corrupt?): string or '}' expected "
             "near end of file",
             path, err.line);
    assert_string_equal(err.text, want);

    /* truncated at half */
    spit(path, text, n / 2);
    assert_int_equal(stagecal_model_load(path, &m, &err), STAGECAL_EDATA);
    snprintf(want, sizeof want, "%s:%ld: not a valid JSON document (truncated or corrupt?): ", path,
             err.line);
    assert_memory_equal(err.text, want, strlen(want));
    /* jansson names the end of input one of two ways, depending on where the cut falls */
    assert_true(strstr(err.text, "end of file") || strstr(err.text, "premature end of input"));

    /* binary garbage in the middle */
    memcpy(text + n / 3, "\x01\xff\xfe", 3);
    spit(path, text, n);
    assert_int_equal(stagecal_model_load(path, &m, &err), STAGECAL_EDATA);
    snprintf(want, sizeof want, "%s:%ld: not a valid JSON document (truncated or corrupt?): ", path,
             err.line);
    assert_memory_equal(err.text, want, strlen(want));

    /* an empty file */
    spit(path, "", 0);
    snprintf(want, sizeof want,
             "%s:1: not a valid JSON document (truncated or corrupt?): '[' or '{' expected near "
             "end of file",
             path);
    expect_load_error(path, STAGECAL_EDATA, want);

    /* JSON, but not ours */
    const char *other = "{\"format\": \"other-tool\", \"version\": 1}";
    spit(path, other, strlen(other));
    snprintf(want, sizeof want,
             "%s: not a stagecal model file (format 'other-tool', expected 'stagecal-model')",
             path);
    expect_load_error(path, STAGECAL_EDATA, want);
    spit(path, "[1, 2]", 6);
    snprintf(want, sizeof want, "%s: not a stagecal model file (the document is not a JSON object)",
             path);
    expect_load_error(path, STAGECAL_EDATA, want);

    /* missing file */
    subdir(path, sizeof path, "corrupt/none.json");
    snprintf(want, sizeof want, "%s: cannot open: No such file or directory", path);
    expect_load_error(path, STAGECAL_ENOINPUT, want);
    free(text);
}

static void model_load_refuses_hand_edit(void **state)
{
    (void)state;
    char dir[1100], path[1200], want[1400];
    subdir(dir, sizeof dir, "edited");
    write_standard(dir, "saturating", path, sizeof path);
    size_t n;
    char *text = slurp(path, &n);
    /* the engineer "improves" the residual sigma by hand: 0.412… → 0.312… */
    char *s = strstr(text, "\"sigma_stages\": 0.4");
    assert_non_null(s);
    s[strlen("\"sigma_stages\": 0.")] = '3';
    spit(path, text, n);
    snprintf(want, sizeof want, "%s: checksum mismatch: the file was edited or damaged", path);
    expect_load_error(path, STAGECAL_EDATA, want);
    free(text);
}

static void model_load_refuses_newer_version(void **state)
{
    (void)state;
    char dir[1100], path[1200], want[1400];
    subdir(dir, sizeof dir, "newer");
    write_standard(dir, "saturating", path, sizeof path);
    size_t n;
    char *text = slurp(path, &n);
    char *s = strstr(text, "\"version\": 1");
    assert_non_null(s);
    s[strlen("\"version\": ")] = '6';
    spit(path, text, n);
    snprintf(want, sizeof want, "%s: written by a newer stagecal (format version 6 > 5)", path);
    expect_load_error(path, STAGECAL_EVERSION, want);
    free(text);
}

static void edit_asymmetric(json_t *doc)
{
    json_t *cov = json_object_get(json_object_get(doc, "correlation"), "covariance");
    json_array_set_new(json_array_get(cov, 0), 1, json_real(0.5));
}
static void edit_extra_parameter(json_t *doc)
{
    json_t *par = json_object_get(json_object_get(doc, "correlation"), "parameters");
    json_array_append_new(par, json_pack("{s:s, s:f}", "name", "c", "value", 1.5));
}
static void edit_negative_variance(json_t *doc)
{
    json_t *cov = json_object_get(json_object_get(doc, "correlation"), "covariance");
    json_array_set_new(json_array_get(cov, 1), 1, json_real(-0.25));
}
static void edit_form(json_t *doc)
{
    json_object_set_new(json_object_get(doc, "correlation"), "form", json_string("wavy"));
}
static void edit_drop_dof(json_t *doc)
{
    json_object_del(json_object_get(doc, "correlation"), "dof");
}
static void edit_sigma_type(json_t *doc)
{
    json_object_set_new(json_object_get(doc, "correlation"), "sigma_stages", json_string("0.4"));
}
static void edit_short_row(json_t *doc)
{
    json_t *cov = json_object_get(json_object_get(doc, "correlation"), "covariance");
    json_array_remove(json_array_get(cov, 1), 1);
}
static void edit_param_name(json_t *doc)
{
    json_t *par = json_object_get(json_object_get(doc, "correlation"), "parameters");
    json_object_set_new(json_array_get(par, 1), "name", json_string("k"));
}
static void edit_envelope(json_t *doc)
{
    json_object_set_new(json_object_get(doc, "envelope"), "r_min", json_real(-1.0));
}
static void edit_hash(json_t *doc)
{
    json_t *in = json_array_get(json_object_get(json_object_get(doc, "provenance"), "inputs"), 0);
    json_object_set_new(in, "sha256", json_string("ABC"));
}

static void model_load_refuses_inconsistent(void **state)
{
    (void)state;
    static const struct {
        void (*edit)(json_t *);
        int code;
        const char *want; /* after "path: " */
    } cases[] = {
        {edit_asymmetric, STAGECAL_EDATA,
         "covariance is not symmetric: [1][0] = 0.0025000000000000001 but [0][1] = 0.5"},
        {edit_extra_parameter, STAGECAL_EDATA,
         "correlation form 'saturating' has 2 parameters but the file lists 3"},
        {edit_negative_variance, STAGECAL_EDATA,
         "covariance[1][1] = -0.25: a variance must be >= 0"},
        {edit_drop_dof, STAGECAL_EDATA, "member 'correlation.dof': missing, expected a number"},
        {edit_sigma_type, STAGECAL_EDATA, "member 'correlation.sigma_stages': expected a number"},
        {edit_short_row, STAGECAL_EDATA,
         "correlation.covariance[1]: expected an array of 2 numbers"},
        {edit_param_name, STAGECAL_EDATA,
         "correlation.parameters[1] is named 'k', the form 'saturating' expects 'b'"},
        {edit_envelope, STAGECAL_EDATA,
         "envelope: R range [-1, inf]: expected 0 <= r_min <= r_max (r_max may be inf)"},
        {edit_hash, STAGECAL_EDATA,
         "provenance.inputs[0]: input 'datasets/demo/run-1.csv': sha256 is not 64 lowercase "
         "hex digits"},
    };
    char dir[1100], path[1200], want[1400];
    subdir(dir, sizeof dir, "inconsistent");
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        write_standard(dir, "saturating", path, sizeof path);
        rewrite_with_checksum(path, cases[i].edit);
        snprintf(want, sizeof want, "%s: %s", path, cases[i].want);
        expect_load_error(path, cases[i].code, want);
    }
    /* an unknown form: the message carries the form parser's own text */
    write_standard(dir, "saturating", path, sizeof path);
    rewrite_with_checksum(path, edit_form);
    stagecal_model m;
    stagecal_error err;
    stagecal_model_init(&m);
    assert_int_equal(stagecal_model_load(path, &m, &err), STAGECAL_EDATA);
    snprintf(want, sizeof want, "%s: correlation form: ", path);
    assert_memory_equal(err.text, want, strlen(want));
    assert_non_null(strstr(err.text, "wavy"));
}

/* ---- evaluation ------------------------------------------------------------------------ */

/* Ten invented (R, stages) points for a straight line in x = 1/R. */
static const double pts_r[] = {0.85, 1.1, 1.45, 1.9, 2.35, 3.05, 3.8, 4.7, 5.9, 7.4};
static const double pts_n[] = {6.02, 6.91, 7.48, 8.16, 8.33, 8.91, 9.02, 9.37, 9.41, 9.77};
#define NPTS 10

/* Least squares by the textbook sums (no code under test): θ, C = s²(XᵀX)⁻¹, s. */
static void textbook_fit(double *a, double *b, double *s, double *xbar, double *sxx)
{
    double sx = 0, sy = 0;
    for (size_t i = 0; i < NPTS; i++) {
        sx += 1.0 / pts_r[i];
        sy += pts_n[i];
    }
    *xbar = sx / NPTS;
    double ybar = sy / NPTS, sxy = 0;
    *sxx = 0;
    for (size_t i = 0; i < NPTS; i++) {
        double dx = 1.0 / pts_r[i] - *xbar;
        *sxx += dx * dx;
        sxy += dx * (pts_n[i] - ybar);
    }
    *b = sxy / *sxx;
    *a = ybar - *b * *xbar;
    double rss = 0;
    for (size_t i = 0; i < NPTS; i++) {
        double e = pts_n[i] - (*a + *b / pts_r[i]);
        rss += e * e;
    }
    *s = sqrt(rss / (NPTS - 2));
}

static void linear_model(stagecal_model *m)
{
    double a, b, s, xbar, sxx;
    fill_model(m, "linear:1+1/R");
    textbook_fit(&a, &b, &s, &xbar, &sxx);
    m->condenser = STAGECAL_CONDENSER_TOTAL;
    m->has_load = 0;
    m->theta[0] = a;
    m->theta[1] = b;
    /* var(a) = s²(1/n + x̄²/Sxx), var(b) = s²/Sxx, cov(a, b) = −x̄ s²/Sxx */
    m->cov[0] = s * s * (1.0 / NPTS + xbar * xbar / sxx);
    m->cov[3] = s * s / sxx;
    m->cov[1] = m->cov[2] = -xbar * s * s / sxx;
    m->sigma = s;
    m->dof = NPTS - 2;
    m->level = 0.95;
    m->r_min = pts_r[0];
    m->r_max = pts_r[NPTS - 1];
}

static void model_eval_matches_textbook_band(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_model_point pt;
    stagecal_error err;
    double a, b, s, xbar, sxx;
    textbook_fit(&a, &b, &s, &xbar, &sxx);
    linear_model(&m);
    /* t(0.975, 8) = 2.306004135 from t tables, scipy.stats.t.ppf(0.975, 8) =
     * 2.3060041350333704 */
    const double t975 = 2.3060041350333704;
    const double r0[] = {1.7, 4.4, INFINITY, 0.6};
    for (size_t k = 0; k < 4; k++) {
        double x0 = isinf(r0[k]) ? 0.0 : 1.0 / r0[k];
        double yhat = a + b * x0;
        /* ŷ ± t·s·sqrt(1/n + (x0 − x̄)²/Sxx), and with 1 + … for a new observation */
        double sf = s * sqrt(1.0 / NPTS + (x0 - xbar) * (x0 - xbar) / sxx);
        double sp = s * sqrt(1.0 + 1.0 / NPTS + (x0 - xbar) * (x0 - xbar) / sxx);
        /* level 0 means the model's default level (0.95) */
        int rc = stagecal_model_eval(&m, r0[k], NAN, 0, &pt, &err);
        if (rc)
            print_error("%s\n", err.text);
        assert_int_equal(rc, STAGECAL_OK);
        /* tolerance 1e-12 relative: two algebraically equal formulas in double precision
         * (the library's gᵀCg against the centred closed form) differ by rounding only */
        assert_rel(pt.stages, yhat, 1e-12, "stages");
        assert_rel(pt.column_stages, yhat - 1, 1e-12, "column stages (total condenser)");
        assert_rel(pt.se_fit, sf, 1e-12, "se_fit");
        assert_rel(pt.se_pred, sp, 1e-12, "se_pred");
        /* t from the library (GSL) against the table value: 1e-10 for the quantile's
         * inversion accuracy */
        assert_rel(pt.t, t975, 1e-10, "t(0.975, 8)");
        assert_rel(pt.ci_low, yhat - t975 * sf, 1e-10, "ci_low");
        assert_rel(pt.ci_high, yhat + t975 * sf, 1e-10, "ci_high");
        assert_rel(pt.pi_low, yhat - t975 * sp, 1e-10, "pi_low");
        assert_rel(pt.pi_high, yhat + t975 * sp, 1e-10, "pi_high");
        assert_rel(pt.level, 0.95, 0, "default level");
    }
    /* 90 %: t(0.95, 8) = 1.859548038 (tables; scipy 1.8595480375228424) */
    assert_int_equal(stagecal_model_eval(&m, 2.0, NAN, 0.90, &pt, &err), STAGECAL_OK);
    double sf = s * sqrt(1.0 / NPTS + (0.5 - xbar) * (0.5 - xbar) / sxx);
    assert_rel(pt.ci_high - pt.stages, 1.8595480375228424 * sf, 1e-10, "90 % half-width");
    /* a partial condenser is one more equilibrium stage */
    m.condenser = STAGECAL_CONDENSER_PARTIAL;
    assert_int_equal(stagecal_model_eval(&m, 2.0, NAN, 0.90, &pt, &err), STAGECAL_OK);
    assert_rel(pt.column_stages, pt.stages - 2, 1e-15, "column stages (partial condenser)");
    stagecal_model_free(&m);
}

/* With a design (format version 3) every band's t is at the Bell–McCaffrey dof of its own
 * contrast, the prediction band's at the Welch–Satterthwaite dof (docs/model-file.md,
 * Bands). The textbook model with its design rows (1, 1/R_i), loaded from a file: at R =
 * 2.85 the dof is the regress module's for g = (1, 1/2.85) (checked against numpy and two
 * hand-derived designs in test_regress.c), below n − p = 8, and the band's half-widths are
 * t·se at those dof. The constant form on n equal rows (a mean) has K = n − 1 at every R
 * (Imbens & Kolesár 2016, §III; its eigenvalues by hand in test_regress.c). 1e-12: the
 * same sums on both sides. */
static void model_eval_uses_design_dof(void **state)
{
    (void)state;
    stagecal_model m, back;
    stagecal_model_point pt;
    stagecal_error err;
    char dir[1100], path[1200];
    double x[2 * NPTS], g[2] = {1, 1 / 2.85}, k;
    linear_model(&m);
    for (size_t i = 0; i < NPTS; i++) {
        x[2 * i] = 1;
        x[2 * i + 1] = 1 / pts_r[i];
    }
    assert_int_equal(stagecal_model_set_design(&m, x, NPTS, &err), STAGECAL_OK);
    subdir(dir, sizeof dir, "design");
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_OK);
    stagecal_model_init(&back);
    assert_int_equal(stagecal_model_load(path, &back, &err), STAGECAL_OK);
    assert_int_equal(back.n_design, NPTS);
    assert_int_equal(stagecal_model_eval(&back, 2.85, NAN, 0.95, &pt, &err), STAGECAL_OK);
    assert_int_equal(stagecal_regress_bm_dof(x, NPTS, 2, g, &k, &err), STAGECAL_OK);
    assert_rel(pt.dof_fit, k, 1e-12, "band dof = the contrast's Bell-McCaffrey dof");
    assert_true(k > 1 && k < NPTS - 2);
    assert_rel(pt.t, gsl_cdf_tdist_Pinv(0.975, k), 1e-12, "t at that dof");
    assert_rel(pt.ci_high - pt.stages, pt.t * pt.se_fit, 1e-12, "confidence half-width");
    double vf = pt.se_fit * pt.se_fit, vo = back.sigma * back.sigma;
    double ws = (vf + vo) * (vf + vo) / (vf * vf / k + vo * vo / back.dof);
    assert_rel(pt.dof_pred, ws, 1e-12, "prediction dof, Welch-Satterthwaite");
    assert_rel(pt.pi_high - pt.stages, gsl_cdf_tdist_Pinv(0.975, ws) * pt.se_pred, 1e-12,
               "prediction half-width");
    stagecal_model_free(&back);
    stagecal_model_free(&m);

    fill_model(&m, "constant");
    m.one_sided = 0;
    m.method = STAGECAL_MODEL_COMPOSITION_SPACE;
    for (size_t i = 0; i < 7; i++)
        x[i] = 0.8; /* standardised rows of a mean: equal, any size */
    assert_int_equal(stagecal_model_set_design(&m, x, 7, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_check(&m, &err), STAGECAL_OK);
    for (double r = 1.5; r < 10; r += 3) {
        assert_int_equal(stagecal_model_eval(&m, r, 1.2, 0.95, &pt, &err), STAGECAL_OK);
        assert_rel(pt.dof_fit, 6, 1e-12, "dof of a mean of 7 = 6");
    }
    stagecal_model_free(&m);
}

/* The same band by the design-matrix formula x0ᵀ(XᵀX)⁻¹x0 (2×2 inverse written out), on
 * a model that went through a file (so what a planner loads is what is checked). */
/* A design with its rows' runs (format version 5): the file keeps them, every band's dof is
 * the run-clustered CR2 Bell–McCaffrey dof of its own contrast (stagecal_regress_contrast_dof,
 * checked against numpy in test_regress_bm.c), and for a balanced mean of G runs it is G − 1
 * (Pustejovsky & Tipton 2018, J. Bus. Econ. Stat. 36, the balanced one-way design; derived in
 * test_regress_bm.c). Tolerance 1e-12 relative: the same computation after a JSON round trip
 * of 17-digit numbers. Fewer than 4 runs is refused by the check. */
static void model_eval_uses_design_run_dof(void **state)
{
    (void)state;
    stagecal_model m, back;
    stagecal_model_point pt;
    stagecal_error err;
    char dir[1100], path[1200];
    double x[2 * NPTS], g[2] = {1, 1 / 2.85}, k, k_hc2;
    size_t run[NPTS];
    linear_model(&m);
    for (size_t i = 0; i < NPTS; i++) {
        x[2 * i] = 1;
        x[2 * i + 1] = 1 / pts_r[i];
        run[i] = i % 4;
    }
    assert_int_equal(stagecal_model_set_design(&m, x, NPTS, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_set_design_run(&m, run, &err), STAGECAL_OK);
    subdir(dir, sizeof dir, "design-run");
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_OK);
    size_t n;
    char *text = slurp(path, &n);
    assert_non_null(strstr(text, "\"version\": 5"));
    free(text);
    stagecal_model_init(&back);
    assert_int_equal(stagecal_model_load(path, &back, &err), STAGECAL_OK);
    assert_non_null(back.design_run);
    for (size_t i = 0; i < NPTS; i++)
        assert_int_equal(back.design_run[i], run[i]);
    assert_int_equal(stagecal_model_eval(&back, 2.85, NAN, 0.95, &pt, &err), STAGECAL_OK);
    assert_int_equal(stagecal_regress_contrast_dof(x, NPTS, 2, run, g, &k, &err), STAGECAL_OK);
    assert_int_equal(stagecal_regress_bm_dof(x, NPTS, 2, g, &k_hc2, &err), STAGECAL_OK);
    assert_rel(pt.dof_fit, k, 1e-12, "band dof = the contrast's clustered dof");
    assert_true(k <= 3 && k < k_hc2); /* at most G − 1, below the windows' own */
    stagecal_model_free(&back);
    /* fewer than 4 runs: refused */
    for (size_t i = 0; i < NPTS; i++)
        run[i] = i % 3;
    assert_int_equal(stagecal_model_set_design_run(&m, run, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_check(&m, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "design_run: 3 runs for 10 rows"));
    stagecal_model_free(&m);

    fill_model(&m, "constant");
    m.one_sided = 0;
    m.method = STAGECAL_MODEL_COMPOSITION_SPACE;
    for (size_t i = 0; i < 8; i++)
        x[i] = 0.8, run[i] = i / 2; /* a mean of 4 runs of 2 windows */
    assert_int_equal(stagecal_model_set_design(&m, x, 8, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_set_design_run(&m, run, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_check(&m, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_eval(&m, 2.5, 1.2, 0.95, &pt, &err), STAGECAL_OK);
    assert_rel(pt.dof_fit, 3, 1e-12, "dof of a balanced mean of 4 runs = 3");
    stagecal_model_free(&m);
}

/* Each parameter's t dof (the report's fit table): without a design the file's dof; with
 * one the Bell–McCaffrey dof of θ_k's own contrast e_k — with the runs clustered by run,
 * against numpy (tests/cr2_crosscheck.py, Pustejovsky & Tipton 2018; tolerance 1e-9
 * relative, the same linear algebra by two routes), without them HC2's (above the
 * clustered); a balanced mean of 4 runs: 3 (the one-way closed form, test_regress_bm.c).
 * Not the dof of the band at some R, a different contrast. */
static void model_param_dof_is_each_parameters_own(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_model_point pt;
    stagecal_error err;
    double x[2 * NPTS], ref[3], k, k1, hc2;
    size_t run[NPTS];
    linear_model(&m);
    assert_int_equal(stagecal_model_param_dof(&m, 1, &k, &err), STAGECAL_OK);
    assert_rel(k, m.dof, 1e-15, "no design: the file's dof");
    for (size_t i = 0; i < NPTS; i++) {
        x[2 * i] = 1;
        x[2 * i + 1] = 1 / pts_r[i];
        run[i] = i % 4;
    }
    testutil_cr2_dof(pts_r, run, NPTS, ref);
    assert_int_equal(stagecal_model_set_design(&m, x, NPTS, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_set_design_run(&m, run, &err), STAGECAL_OK);
    for (size_t j = 0; j < 2; j++) {
        assert_int_equal(stagecal_model_param_dof(&m, j, &k, &err), STAGECAL_OK);
        assert_rel(k, ref[j], 1e-9, "clustered parameter dof vs numpy");
        assert_true(k <= 3);
    }
    assert_int_equal(stagecal_model_param_dof(&m, 0, &k, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_eval(&m, 3.0, NAN, 0.95, &pt, &err), STAGECAL_OK);
    assert_true(fabs(pt.dof_fit - k) > 0.01); /* the band's contrast is another */
    assert_int_equal(stagecal_model_set_design_run(&m, NULL, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_param_dof(&m, 1, &hc2, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_set_design_run(&m, run, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_param_dof(&m, 1, &k1, &err), STAGECAL_OK);
    assert_true(hc2 > k1);
    assert_int_equal(stagecal_model_param_dof(&m, 2, &k, &err), STAGECAL_EINVAL);
    stagecal_model_free(&m);

    fill_model(&m, "constant");
    m.one_sided = 0;
    for (size_t i = 0; i < 8; i++)
        x[i] = 0.8, run[i] = i / 2; /* a mean of 4 runs of 2 windows */
    assert_int_equal(stagecal_model_set_design(&m, x, 8, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_set_design_run(&m, run, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_param_dof(&m, 0, &k, &err), STAGECAL_OK);
    assert_rel(k, 3, 1e-12, "a balanced mean of 4 runs: 3");
    stagecal_model_free(&m);
}

static void model_eval_after_load_matches_design_matrix(void **state)
{
    (void)state;
    stagecal_model m, back;
    stagecal_model_point pt;
    stagecal_error err;
    char dir[1100], path[1200];
    linear_model(&m);
    subdir(dir, sizeof dir, "planner");
    assert_int_equal(stagecal_model_write(&m, dir, path, sizeof path, &err), STAGECAL_OK);
    stagecal_model_init(&back);
    assert_int_equal(stagecal_model_load(path, &back, &err), STAGECAL_OK);

    /* (XᵀX) for rows (1, 1/R_i), inverted in closed form for 2×2 */
    double s00 = NPTS, s01 = 0, s11 = 0;
    for (size_t i = 0; i < NPTS; i++) {
        s01 += 1.0 / pts_r[i];
        s11 += 1.0 / (pts_r[i] * pts_r[i]);
    }
    double det = s00 * s11 - s01 * s01;
    double x0 = 1.0 / 2.85;
    double q = (s11 - 2 * x0 * s01 + x0 * x0 * s00) / det; /* x0ᵀ(XᵀX)⁻¹x0 */
    assert_int_equal(stagecal_model_eval(&back, 2.85, NAN, 0.95, &pt, &err), STAGECAL_OK);
    /* 1e-11: the determinant form loses a few more digits than the centred one */
    assert_rel(pt.se_fit, back.sigma * sqrt(q), 1e-11, "se_fit, design matrix");
    assert_rel(pt.se_pred, back.sigma * sqrt(1 + q), 1e-11, "se_pred, design matrix");
    assert_int_equal(pt.extrapolated, 0);
    stagecal_model_free(&back);
    stagecal_model_free(&m);
}

static void model_eval_flags_extrapolation(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_model_point pt;
    stagecal_error err;
    linear_model(&m); /* R envelope [0.85, 7.4] */

    assert_int_equal(stagecal_model_eval(&m, 3.3, NAN, 0, &pt, &err), STAGECAL_OK);
    assert_int_equal(pt.extrapolated, 0);
    assert_int_equal(pt.outside, 0);
    assert_abs(pt.r_beyond, 0, 0, "inside: r_beyond");

    assert_int_equal(stagecal_model_eval(&m, 0.6, NAN, 0, &pt, &err), STAGECAL_OK);
    assert_int_equal(pt.extrapolated, 1);
    assert_int_equal(pt.outside, STAGECAL_MODEL_R_BELOW);
    assert_rel(pt.r_beyond, 0.25, 1e-15, "below: r_beyond = 0.85 - 0.6");
    assert_rel(pt.lv_beyond, 0.85 / 1.85 - 0.6 / 1.6, 1e-15, "below: lv_beyond");

    assert_int_equal(stagecal_model_eval(&m, INFINITY, NAN, 0, &pt, &err), STAGECAL_OK);
    assert_int_equal(pt.outside, STAGECAL_MODEL_R_ABOVE);
    assert_true(isinf(pt.r_beyond));
    assert_rel(pt.lv_beyond, 1 - 7.4 / 8.4, 1e-15, "total reflux: lv_beyond");

    /* a load model: F outside its range is flagged too, with how far */
    stagecal_model_free(&m);
    fill_model(&m, "saturating-load"); /* R [1/3, inf], F [0.61, 2.236…] */
    assert_int_equal(stagecal_model_eval(&m, 2.5, 1.2, 0, &pt, &err), STAGECAL_OK);
    assert_int_equal(pt.extrapolated, 0);
    assert_int_equal(stagecal_model_eval(&m, 2.5, 2.75, 0, &pt, &err), STAGECAL_OK);
    assert_int_equal(pt.outside, STAGECAL_MODEL_F_ABOVE);
    assert_rel(pt.f_beyond, 2.75 - 2.2360679774997898, 1e-15, "f_beyond");
    assert_int_equal(stagecal_model_eval(&m, 0.2, 0.4, 0, &pt, &err), STAGECAL_OK);
    assert_int_equal(pt.outside, STAGECAL_MODEL_R_BELOW | STAGECAL_MODEL_F_BELOW);
    assert_rel(pt.f_beyond, 0.21, 1e-14, "f_beyond below");
    stagecal_model_free(&m);
}

static void model_eval_rejects_bad_arguments(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_model_point pt;
    stagecal_error err;
    linear_model(&m);
    assert_int_equal(stagecal_model_eval(&m, -0.5, NAN, 0, &pt, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "reflux ratio R = -0.5: expected R >= 0 or inf");
    assert_int_equal(stagecal_model_eval(&m, NAN, NAN, 0, &pt, &err), STAGECAL_EINVAL);
    assert_int_equal(stagecal_model_eval(&m, 2, NAN, 1.5, &pt, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "level = 1.5: expected a number in (0, 1)");
    /* 1/R is undefined at R = 0: the form says so */
    assert_int_equal(stagecal_model_eval(&m, 0, NAN, 0, &pt, &err), STAGECAL_EINVAL);
    stagecal_model_free(&m);
    fill_model(&m, "saturating-load");
    assert_int_equal(stagecal_model_eval(&m, 2, NAN, 0, &pt, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "F-factor = nan Pa^0.5: the form 'saturating-load' needs a "
                                  "finite F >= 0");
    stagecal_model_free(&m);
}

static void model_add_helpers_validate(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    double v = 1.5;
    stagecal_model_init(&m);
    assert_int_equal(stagecal_model_add_vle_param(&m, "", &v, 1, &err), STAGECAL_EINVAL);
    assert_int_equal(stagecal_model_add_vle_param(&m, "alpha", &v, 0, &err), STAGECAL_EINVAL);
    assert_int_equal(stagecal_model_add_input(&m, "a.csv", "12ab", 3, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "input 'a.csv': sha256 is not 64 lowercase hex digits");
    assert_int_equal(m.n_vle_params + m.n_inputs, 0);
    stagecal_model_stamp_now(&m);
    assert_int_equal(strlen(m.fitted_utc), 20);
    assert_int_equal(m.fitted_utc[19], 'Z');
    stagecal_model_free(&m);
    stagecal_model_free(NULL);
}

/* ---- the equilibrium model in the file ------------------------------------------------ */

/* Antoine sets of the NIST Chemistry WebBook and the parameter sets used in
 * tests/test_stages.c: NRTL-A and van Laar ethanol–water (Gmehling & Onken 1977; Perry's; source
 * secondary); Wilson and Margules methanol–water are illustrative (a round trip needs
 * no source). */
static const stagecal_antoine VLE_ETHANOL = {5.24677, 1598.673, -46.424, 292.77, 366.63};
static const stagecal_antoine VLE_WATER = {5.08354, 1663.125, -45.622, 344.0, 373.0};
static const stagecal_antoine VLE_METHANOL = {5.20409, 1581.341, -33.50, 288.1, 356.83};
static const stagecal_antoine VLE_BENZENE = {4.01814, 1203.835, -53.226, 287.70, 354.07};
static const stagecal_antoine VLE_TOLUENE = {4.07827, 1343.943, -53.773, 308.52, 384.66};
static const double VLE_NRTL_A[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};

#define VLE_KINDS 11

/* Model i of the round trip: every kind, tables with and without temperatures and end
 * points, an activity model with non-default tunables. */
static stagecal_vle *roundtrip_vle(int i)
{
    static const double tx[4] = {0.05, 0.3, 0.6, 0.9}, ty[4] = {0.2, 0.55, 0.78, 0.95};
    static const double ux[5] = {0, 0.2, 0.5, 0.8, 1}, uy[5] = {0, 0.45, 0.72, 0.9, 1};
    static const double ut[5] = {373.15, 362.4, 356.05, 352.9, 351.44};
    const stagecal_antoine ew[2] = {VLE_ETHANOL, VLE_WATER}, mw[2] = {VLE_METHANOL, VLE_WATER};
    const stagecal_antoine bt[2] = {VLE_BENZENE, VLE_TOLUENE};
    const double vl[2] = {1.6798, 0.9227}, wi[4] = {1000.0, 2000.0, 40.7e-6, 18.07e-6};
    const double ma[2] = {0.6, 0.4};
    stagecal_vle_params vp = stagecal_vle_default_params();
    stagecal_error err;
    stagecal_vle *v = NULL;
    vp.grid_n = 257;
    vp.t_epsrel = 1e-12;
    vp.max_iter = 50;
    switch (i) {
    case 0:
        v = stagecal_vle_alloc_alpha(2.385, &err);
        break;
    case 1:
        v = stagecal_vle_alloc_kvalue(1.37, &err);
        break;
    case 2:
        v = stagecal_vle_alloc_table(tx, ty, NULL, 4, &err);
        break;
    case 3:
        v = stagecal_vle_alloc_table(ux, uy, ut, 5, &err);
        break;
    case 4:
        v = stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, bt, NULL, 0, 101325.0, NULL, &err);
        break;
    case 5:
        v = stagecal_vle_alloc_activity(STAGECAL_VLE_WILSON, mw, wi, 4, 101325.0, NULL, &err);
        break;
    case 6:
        v = stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, VLE_NRTL_A, 5, 101325.0, NULL, &err);
        break;
    case 7:
        v = stagecal_vle_alloc_activity(STAGECAL_VLE_VANLAAR, ew, vl, 2, 101325.0, NULL, &err);
        break;
    case 8:
        v = stagecal_vle_alloc_activity(STAGECAL_VLE_MARGULES, mw, ma, 2, 101325.0, NULL, &err);
        break;
    case 9: /* tunables away from their defaults must travel too */
        v = stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, VLE_NRTL_A, 5, 60000.0, &vp, &err);
        break;
    default: { /* an Antoine set without a stated range (0, 0) */
        stagecal_antoine nr[2] = {VLE_BENZENE, {4.07827, 1343.943, -53.773, 0.0, 0.0}};
        v = stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, nr, NULL, 0, 101325.0, NULL, &err);
    }
    }
    if (!v)
        print_error("model %d: %s\n", i, err.text);
    assert_non_null(v);
    return v;
}

static const stagecal_model_vle_param *vle_param(const stagecal_model *m, const char *name)
{
    for (size_t i = 0; i < m->n_vle_params; i++)
        if (strcmp(m->vle_params[i].name, name) == 0)
            return &m->vle_params[i];
    return NULL;
}

/* Every kind through a model file and back: the rebuilt model answers y*(x), x*(y) and
 * T_bubble like the original. Tolerance 1e-12 absolute (the task's bar): the rebuild
 * gets the same numbers (17 significant digits in the file), so the same nodes and GSL
 * slopes, and should agree to the last bit; 1e-12 leaves rounding room only. */
static void model_vle_roundtrip_every_kind(void **state)
{
    (void)state;
    for (int k = 0; k < VLE_KINDS; k++) {
        stagecal_model m, back;
        stagecal_error err;
        char dir[1200], path[1400], what[64];
        stagecal_vle *orig = roundtrip_vle(k), *re = NULL;
        fill_model(&m, "saturating");
        assert_int_equal(stagecal_model_set_vle(&m, orig, &err), STAGECAL_OK);
        assert_string_equal(m.vle_kind, stagecal_vle_kind_name(stagecal_vle_get_kind(orig)));
        snprintf(what, sizeof what, "vle-%d", k);
        subdir(dir, sizeof dir, what);
        int rc = stagecal_model_write(&m, dir, path, sizeof path, &err);
        if (rc != STAGECAL_OK)
            print_error("write: %s\n", err.text);
        assert_int_equal(rc, STAGECAL_OK);
        stagecal_model_init(&back);
        assert_int_equal(stagecal_model_load(path, &back, &err), STAGECAL_OK);
        rc = stagecal_model_build_vle(&back, &re, &err);
        if (rc != STAGECAL_OK)
            print_error("build %d: %s\n", k, err.text);
        assert_int_equal(rc, STAGECAL_OK);
        assert_int_equal(stagecal_vle_get_kind(re), stagecal_vle_get_kind(orig));
        double x_max = stagecal_vle_x_max(orig);
        bits_equal(stagecal_vle_x_max(re), x_max, "x_max");
        bits_equal(stagecal_vle_pressure(re), stagecal_vle_pressure(orig), "pressure");
        assert_int_equal(stagecal_vle_has_temperature(re), stagecal_vle_has_temperature(orig));
        for (int i = 0; i <= 1000; i++) {
            double x = x_max * i / 1000.0, ya, yb, xa, xb, ta, tb;
            snprintf(what, sizeof what, "%s y*(%g)",
                     stagecal_vle_kind_name(stagecal_vle_get_kind(orig)), x);
            assert_int_equal(stagecal_vle_ystar(orig, x, &ya), STAGECAL_OK);
            assert_int_equal(stagecal_vle_ystar(re, x, &yb), STAGECAL_OK);
            assert_abs(yb, ya, 1e-12, what);
            double y = i / 1000.0;
            snprintf(what, sizeof what, "%s x*(%g)",
                     stagecal_vle_kind_name(stagecal_vle_get_kind(orig)), y);
            int ra = stagecal_vle_xstar(orig, y, &xa), rb = stagecal_vle_xstar(re, y, &xb);
            assert_int_equal(rb, ra);
            if (ra == STAGECAL_OK)
                assert_abs(xb, xa, 1e-12, what);
            if (stagecal_vle_has_temperature(orig) && i % 50 == 0) {
                assert_int_equal(stagecal_vle_tbubble(orig, x, &ta), STAGECAL_OK);
                assert_int_equal(stagecal_vle_tbubble(re, x, &tb), STAGECAL_OK);
                assert_abs(tb, ta, 1e-12 * ta, "T_bubble [K]");
            }
        }
        size_t naz = stagecal_vle_azeotropes(orig, NULL, 0);
        assert_int_equal(stagecal_vle_azeotropes(re, NULL, 0), naz);
        stagecal_vle_free(re);
        stagecal_vle_free(orig);
        stagecal_model_free(&back);
        stagecal_model_free(&m);
    }
}

/* The names of docs/model-file.md hold the construction inputs (not values the code
 * computed): the file is readable by a planner that does not link stagecal. */
static void model_vle_parameters_are_named_inputs(void **state)
{
    (void)state;
    static const char *const nrtl_names[5] = {"tau12_a", "tau12_b_k", "tau21_a", "tau21_b_k",
                                              "alpha12"};
    stagecal_model m;
    stagecal_error err;
    stagecal_vle *v = roundtrip_vle(6);
    stagecal_model_init(&m);
    assert_int_equal(stagecal_model_set_vle(&m, v, &err), STAGECAL_OK);
    assert_string_equal(m.vle_kind, "nrtl");
    /* pressure, 2 × 5 Antoine members, 5 NRTL parameters; default tunables left out */
    assert_int_equal(m.n_vle_params, 16);
    for (int i = 0; i < 5; i++)
        bits_equal(vle_param(&m, nrtl_names[i])->values[0], VLE_NRTL_A[i], nrtl_names[i]);
    bits_equal(vle_param(&m, "pressure_pa")->values[0], 101325.0, "pressure_pa");
    bits_equal(vle_param(&m, "antoine_light_b")->values[0], VLE_ETHANOL.b, "antoine_light_b");
    bits_equal(vle_param(&m, "antoine_heavy_t_max_k")->values[0], VLE_WATER.t_max_k,
               "antoine_heavy_t_max_k");
    assert_null(vle_param(&m, "grid_n"));
    stagecal_vle_free(v);

    /* set_vle replaces what the model held */
    v = roundtrip_vle(0);
    assert_int_equal(stagecal_model_set_vle(&m, v, &err), STAGECAL_OK);
    assert_string_equal(m.vle_kind, "alpha");
    assert_int_equal(m.n_vle_params, 1);
    bits_equal(vle_param(&m, "alpha")->values[0], 2.385, "alpha");
    stagecal_vle_free(v);

    /* the table: the data with the end points (0, 0) and (1, 1) added */
    v = roundtrip_vle(2);
    assert_int_equal(stagecal_model_set_vle(&m, v, &err), STAGECAL_OK);
    const stagecal_model_vle_param *px = vle_param(&m, "x"), *py = vle_param(&m, "y");
    assert_int_equal(px->n, 6);
    assert_int_equal(py->n, 6);
    bits_equal(px->values[0], 0.0, "x[0]");
    bits_equal(px->values[2], 0.3, "x[2]");
    bits_equal(py->values[4], 0.95, "y[4]");
    bits_equal(py->values[5], 1.0, "y[5]");
    assert_null(vle_param(&m, "t_k"));
    stagecal_vle_free(v);

    /* tunables away from the defaults are written */
    v = roundtrip_vle(9);
    assert_int_equal(stagecal_model_set_vle(&m, v, &err), STAGECAL_OK);
    bits_equal(vle_param(&m, "grid_n")->values[0], 257.0, "grid_n");
    bits_equal(vle_param(&m, "t_epsrel")->values[0], 1e-12, "t_epsrel");
    bits_equal(vle_param(&m, "max_iter")->values[0], 50.0, "max_iter");
    assert_null(vle_param(&m, "exact"));
    stagecal_vle_free(v);
    stagecal_model_free(&m);
}

static void expect_build_error(const stagecal_model *m, const char *want)
{
    stagecal_error err;
    stagecal_vle *v = (stagecal_vle *)&err; /* must be reset to NULL on failure */
    int rc = stagecal_model_build_vle(m, &v, &err);
    if (rc != STAGECAL_EDATA || !strstr(err.text, want))
        print_error("got %d '%s', want EDATA with '%s'\n", rc, err.text, want);
    assert_int_equal(rc, STAGECAL_EDATA);
    assert_null(v);
    assert_non_null(strstr(err.text, want));
}

/* Files written before the full system was recorded load, and say what is missing when
 * a rebuild is asked for; damaged parameter sets are refused as data errors. */
static void model_vle_build_refuses_incomplete(void **state)
{
    (void)state;
    stagecal_model m, back;
    stagecal_error err;
    stagecal_vle *v = NULL;
    char dir[1200], path[1400];
    double y;

    /* the standard model is written the old way: kind "nrtl", parameters not by name */
    subdir(dir, sizeof dir, "vle-old");
    write_standard(dir, "saturating", path, sizeof path);
    stagecal_model_init(&back);
    assert_int_equal(stagecal_model_load(path, &back, &err), STAGECAL_OK);
    expect_build_error(&back, "parameter 'pressure_pa' is missing");
    stagecal_model_free(&back);

    /* an old alpha file (alpha and the pressure, as the first writer did) rebuilds */
    stagecal_model_init(&m);
    snprintf(m.vle_kind, sizeof m.vle_kind, "alpha");
    double alpha = 2.385, p = 101325.0;
    assert_int_equal(stagecal_model_add_vle_param(&m, "alpha", &alpha, 1, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_add_vle_param(&m, "pressure_pa", &p, 1, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_build_vle(&m, &v, &err), STAGECAL_OK);
    assert_int_equal(stagecal_vle_ystar(v, 0.5, &y), STAGECAL_OK);
    /* y*(0.5) = α/(α + 1) for constant α (closed form); 1e-15 relative = rounding */
    assert_rel(y, 2.385 / 3.385, 1e-15, "alpha model rebuilt from an old file");
    stagecal_vle_free(v);
    stagecal_model_free(&m);

    stagecal_model_init(&m);
    snprintf(m.vle_kind, sizeof m.vle_kind, "kvalue");
    expect_build_error(&m, "parameter 'k' is missing");
    snprintf(m.vle_kind, sizeof m.vle_kind, "uniquac");
    expect_build_error(&m, "equilibrium model 'uniquac' is unknown");
    snprintf(m.vle_kind, sizeof m.vle_kind, "table");
    expect_build_error(&m, "parameter 'x' is missing");
    const double x[3] = {0.2, 0.5, 0.8}, yy[4] = {0.4, 0.7, 0.9, 0.95};
    assert_int_equal(stagecal_model_add_vle_param(&m, "x", x, 3, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_add_vle_param(&m, "y", yy, 4, &err), STAGECAL_OK);
    expect_build_error(&m, "x has 3 values but y 4");
    stagecal_model_free(&m);

    /* a curve that falls is refused on load with the x where it stops rising (the
     * model file's table of issue 18: y = 0, 0.7, 0.6, 0.6) */
    stagecal_model_init(&m);
    snprintf(m.vle_kind, sizeof m.vle_kind, "table");
    const double fx[4] = {0.0, 0.3, 0.6, 0.9}, fy[4] = {0.0, 0.7, 0.6, 0.6};
    assert_int_equal(stagecal_model_add_vle_param(&m, "x", fx, 4, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_add_vle_param(&m, "y", fy, 4, &err), STAGECAL_OK);
    expect_build_error(&m, "equilibrium model 'table': table model: y* stops rising at x = 0.3");
    stagecal_model_free(&m);

    /* out of the model's domain: the vle's own message, as a data error */
    v = roundtrip_vle(6);
    stagecal_model_init(&m);
    assert_int_equal(stagecal_model_set_vle(&m, v, &err), STAGECAL_OK);
    stagecal_vle_free(v);
    for (size_t i = 0; i < m.n_vle_params; i++)
        if (strcmp(m.vle_params[i].name, "alpha12") == 0)
            m.vle_params[i].values[0] = 3.0;
    expect_build_error(&m, "nrtl non-randomness 3 is outside (0, 1]");
    double g = 300.5;
    assert_int_equal(stagecal_model_add_vle_param(&m, "grid_n", &g, 1, &err), STAGECAL_OK);
    expect_build_error(&m, "'grid_n' = 300.5, expected a whole number");
    stagecal_model_free(&m);
}

static int group_setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    snprintf(workdir, sizeof workdir, "%s/model-test-XXXXXX", STAGECAL_BUILD_DIR);
    return mkdtemp(workdir) ? 0 : -1;
}

static int group_teardown(void **state)
{
    (void)state;
    rm_tree(workdir);
    return 0;
}

/* ---- more refusals of the reader (issue 8: coverage) --------------------------------- */

/* One edit of the saved standard model: the member at a dotted path (numbers index
 * arrays) is replaced by the JSON text `json`, or deleted when json is NULL. */
static const char *edit_at_path;
static const char *edit_at_json;

static void edit_at(json_t *doc)
{
    char buf[256], *save = NULL;
    json_t *parent = doc;
    snprintf(buf, sizeof buf, "%s", edit_at_path);
    char *key = strtok_r(buf, ".", &save);
    for (char *next; (next = strtok_r(NULL, ".", &save)) != NULL; key = next) {
        parent = json_is_array(parent) ? json_array_get(parent, strtoul(key, NULL, 10))
                                       : json_object_get(parent, key);
        assert_non_null(parent);
    }
    json_error_t jerr;
    json_t *v = edit_at_json ? json_loads(edit_at_json, JSON_DECODE_ANY, &jerr) : NULL;
    if (edit_at_json)
        assert_non_null(v);
    if (json_is_array(parent)) {
        size_t k = strtoul(key, NULL, 10);
        assert_int_equal(v ? json_array_set_new(parent, k, v) : json_array_remove(parent, k), 0);
    } else {
        assert_int_equal(v ? json_object_set_new(parent, key, v) : json_object_del(parent, key), 0);
    }
}

/* Every member the reader checks, provoked one at a time on an otherwise valid file with
 * a fresh checksum; the expected texts are those docs/model-file.md's rules give ("path:
 * what is wrong, what was expected", STYLE/DESIGN message form). The standard model is
 * fill_model's: partial condenser, form 'saturating' (p = 2), NRTL parameters 'nrtl'
 * (5 numbers) and 'p_pa', a load envelope and an HETP block. */
static void model_load_refuses_each_member(void **state)
{
    (void)state;
    static const struct {
        const char *path, *json, *want; /* want: after "path: " */
    } cases[] = {
        {"format", "\"stagecal-plan\"",
         "not a stagecal model file (format 'stagecal-plan', expected 'stagecal-model')"},
        {"format", "3", "not a stagecal model file (no \"format\": \"stagecal-model\" member)"},
        {"version", "\"1\"", "member 'version': expected an integer format version"},
        {"version", "0", "unknown format version 0 (expected 1 to 5)"},
        {"column", "17", "member 'column': expected a string"},
        {"stage_convention", "\"partial\"", "member 'stage_convention': expected an object"},
        {"stage_convention.condenser", "\"none\"",
         "stage_convention.condenser 'none': expected 'total' or 'partial'"},
        {"stage_convention.text", "\"stages include the pot\"",
         "stage_convention.text does not match the partial-condenser convention ('stages include "
         "the pot; column stages = stages - 2; the partial condenser is an equilibrium stage' "
         "expected)"},
        {"evidence.windows", "-3", "member 'evidence.windows': expected an integer >= 0"},
        {"evidence.runs", "2.5", "member 'evidence.runs': expected an integer >= 0"},
        {"envelope.kind", "\"ellipse\"", "envelope.kind 'ellipse': expected 'box'"},
        {"envelope.r_max", "\"infinite\"", "member 'envelope.r_max': expected a number or \"inf\""},
        {"envelope.f_max_sqrt_pa", NULL,
         "member 'envelope.f_max_sqrt_pa': missing, expected a number"},
        {"hetp", "3", "member 'hetp': expected an object or null"},
        {"hetp.reference", NULL, "member 'hetp.reference': missing, expected an object"},
        {"hetp.reference.f_sqrt_pa", "\"inf\"",
         "member 'hetp.reference.f_sqrt_pa': expected a number"},
        {"provenance.inputs", "{}", "member 'provenance.inputs': expected an array"},
        {"provenance.inputs.0", "1", "provenance.inputs[0]: expected an object"},
        {"provenance.inputs.1.path", "1", "provenance.inputs[1].path: expected a string"},
        {"provenance.inputs.0.rows", "1.5",
         "member 'provenance.inputs[].rows': expected an integer >= 0"},
        {"provenance.data_first_utc", "5",
         "member 'provenance.data_first_utc': expected a string or null"},
        {"provenance.seed", "-1", "member 'provenance.seed': expected an integer >= 0"},
        {"provenance.command_line", "[]",
         "member 'provenance.command_line': expected a string or null"},
        {"warnings", "\"none\"", "member 'warnings': expected an array"},
        {"warnings.0", "7", "warnings[0]: expected a string"},
        {"system.light",
         "\"a-name-much-longer-than-any-component-name-the-file-allows-"
         "a-name-much-longer-than-any-component-name-the-file-allows\"",
         NULL /* checked below with the field's size */},
        {"system.equilibrium.parameters.p_pa", "\"101325\"",
         "equilibrium parameter 'p_pa': expected a number or a non-empty array of numbers"},
        {"system.equilibrium.parameters.p_pa", "[]",
         "equilibrium parameter 'p_pa': expected a number or a non-empty array of numbers"},
        {"system.equilibrium.parameters.nrtl.2", "\"x\"",
         "equilibrium parameter 'nrtl': element 3 is not a number"},
        {"correlation", NULL, "member 'correlation': missing, expected an object"},
        {"correlation.form", "\"linear:1/R+1\"",
         "correlation form 'linear:1/R+1' is not in canonical notation ('linear:1+1/R' "
         "expected)"},
        {"system.equilibrium.parameters",
         "{\"a-parameter-name-much-longer-than-the-sixty-three-characters-that-the-model-file-"
         "allows\": 1}",
         "system.equilibrium.parameters: equilibrium parameter name: expected 1 to 63 "
         "characters"},
        {"correlation.parameters.0", "3", "correlation.parameters[0]: expected an object"},
        {"correlation.parameters.0.value", "\"inf\"",
         "member 'correlation.parameters[].value': expected a number"},
        {"correlation.covariance", "[[1, 0]]",
         "correlation.covariance: expected 2 rows (p x p), found 1"},
        {"correlation.covariance.0.1", "\"x\"", "correlation.covariance[0][1]: expected a number"},
        /* the design (version 3): rows of p numbers, more rows than p, a usable design */
        {"correlation.design", "{}", "member 'correlation.design': expected an array"},
        {"correlation.design", "[[1, 0.5], [1, 0.2]]",
         "correlation.design: 2 rows for 2 parameters (expected more rows)"},
        {"correlation.design", "[[1, 0.5], [1, 0.2], [1]]",
         "correlation.design[2]: expected an array of 2 numbers"},
        {"correlation.design", "[[1, 0.5], [1, \"x\"], [1, 0.1]]",
         "correlation.design[1][1]: expected a number"},
        {"correlation.design", "[[1, 2], [2, 4], [0.5, 1]]",
         "design: Bell-McCaffrey dof: the design is rank deficient"},
        {"correlation.method", "\"moment-space\"",
         "correlation.method 'moment-space': expected 'stage-space', 'composition-space' or "
         "'censored-likelihood'"},
        /* the optional physical data: when present, a finite number > 0 */
        {"system.latent_heat_j_mol", "-32000",
         "system: latent_heat_j_mol = -32000: expected a finite number > 0"},
        {"system.latent_heat_j_mol", "0",
         "system: latent_heat_j_mol = 0: expected a finite number > 0"},
        {"system.latent_heat_j_mol", "null",
         "member 'system.latent_heat_j_mol': expected a number"},
        {"system.molar_mass_light_kg_mol", "-0.078112",
         "system: molar_mass_light_kg_mol = -0.078112: expected a finite number > 0"},
        {"system.molar_mass_heavy_kg_mol", "\"0.092138\"",
         "member 'system.molar_mass_heavy_kg_mol': expected a number"},
    };
    char dir[1100], path[1200], want[1400];
    subdir(dir, sizeof dir, "each-member");
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        write_standard(dir, "saturating", path, sizeof path);
        edit_at_path = cases[i].path;
        edit_at_json = cases[i].json;
        rewrite_with_checksum(path, edit_at);
        if (cases[i].want)
            snprintf(want, sizeof want, "%s: %s", path, cases[i].want);
        else
            snprintf(want, sizeof want, "%s: member 'system.light': longer than %zu characters",
                     path, sizeof((stagecal_model *)0)->light - 1);
        expect_load_error(path, STAGECAL_EDATA, want);
    }
}

/* The checksum block itself: an algorithm other than SHA-256 is named (docs/model-file.md:
 * "checksum.algorithm" is "sha256"); a document that is not an object is not a model
 * file; a parse without a source name is reported as "model". */
static void model_parse_refuses_checksum_and_shape(void **state)
{
    (void)state;
    char dir[1100], path[1200];
    size_t n;
    subdir(dir, sizeof dir, "checksum-shape");
    write_standard(dir, "saturating", path, sizeof path);
    char *text = slurp(path, &n);
    char *alg = strstr(text, "\"sha256\"");
    assert_non_null(alg);
    memcpy(alg, "\"sha512\"", 8);
    stagecal_model m;
    stagecal_error err;
    stagecal_model_init(&m);
    assert_int_equal(stagecal_model_parse(text, n, "k.json", &m, &err), STAGECAL_EDATA);
    assert_string_equal(err.text, "k.json: checksum algorithm 'sha512': expected 'sha256'");
    free(text);
    assert_int_equal(stagecal_model_parse("[1, 2]", 6, NULL, &m, &err), STAGECAL_EDATA);
    assert_string_equal(err.text,
                        "model: not a stagecal model file (the document is not a JSON object)");
    assert_int_equal(stagecal_model_parse("{\"format\": \"stagecal-model\", \"version\": 1}", 42,
                                          "v.json", &m, &err),
                     STAGECAL_EDATA);
    assert_string_equal(err.text, "v.json: member 'checksum': missing, expected an object");
    stagecal_model_free(&m);
}

/* Breaks one rule of the format (docs/model-file.md) on the standard model; returns the
 * message stagecal_model_check must give (the rule's own wording), NULL after the last. */
static const char *break_rule(stagecal_model *m, int k)
{
    switch (k) {
    case 0:
        snprintf(m->column_id, sizeof m->column_id, ".hidden");
        return "column id '.hidden': expected letters, digits, '_', '.', '-' (not starting with "
               "'.')";
    case 1:
        m->heavy[0] = '\0';
        return "system: component names must not be empty";
    case 2:
        m->vle_kind[0] = '\0';
        return "system: equilibrium model name must not be empty";
    case 3:
        m->vle_params[0].values[2] = NAN;
        return "equilibrium parameter 'nrtl': value 3 is not finite";
    case 4:
        snprintf(m->vle_params[1].name, sizeof m->vle_params[1].name, "nrtl");
        return "equilibrium parameter 'nrtl' appears twice";
    case 5:
        m->condenser = (stagecal_condenser)5;
        return "stage convention: unknown condenser type 5";
    case 6:
        m->form.p = 3;
        return "correlation form 'saturating' has 2 parameters, not 3";
    case 7:
        m->theta[1] = NAN;
        return "parameter 'b' is not finite";
    case 8:
        m->cov[1] = INFINITY;
        return "covariance[0][1] is not finite";
    case 9:
        m->sigma = -1;
        return "sigma_stages = -1: expected a finite number >= 0";
    case 10:
        m->dof = 0;
        return "dof = 0: expected a finite number > 0";
    case 11:
        m->level = 1;
        return "confidence_level = 1: expected a number in (0, 1)";
    case 12:
        m->method = (stagecal_model_method)9;
        return "fit method 9 is unknown";
    case 13:
        assert_int_equal(stagecal_form_parse("linear:1+F", &m->form, NULL), STAGECAL_OK);
        m->has_load = 0;
        return "envelope: the form 'linear:1+F' uses the F-factor but the envelope has no F range";
    case 14:
        m->f_min = 3;
        return "envelope: F range [3, 2.23607] Pa^0.5: expected finite 0 <= f_min <= f_max";
    case 15:
        m->inputs[0].path[0] = '\0';
        return "provenance: input 1 has no path";
    case 16:
        m->inputs[1].sha256[0] = 'E';
        return "provenance: input 'caf\xc3\xa9/run \"2\".csv': sha256 is not 64 lowercase hex "
               "digits";
    case 17:
        snprintf(m->fitted_utc, sizeof m->fitted_utc, "yesterday");
        return "provenance: fitted_utc 'yesterday': expected YYYY-MM-DDTHH:MM:SSZ";
    case 18:
        snprintf(m->data_first_utc, sizeof m->data_first_utc, "spring");
        return "provenance: data_first_utc 'spring': expected YYYY-MM-DDTHH:MM:SSZ";
    case 19:
        snprintf(m->data_last_utc, sizeof m->data_last_utc, "autumn");
        return "provenance: data_last_utc 'autumn': expected YYYY-MM-DDTHH:MM:SSZ";
    case 20:
        m->tool_version[0] = '\0';
        return "provenance: tool_version must not be empty";
    case 21:
        m->seed = 1ull << 63;
        return "provenance: seed 9223372036854775808 is larger than 2^63 - 1";
    case 22:
        m->height_m = 0;
        return "hetp: height_m = 0: expected a finite number > 0";
    case 23:
        m->hetp_r = -1;
        return "hetp: reference R = -1: expected >= 0 (inf allowed)";
    case 24:
        m->hetp_f = NAN;
        return "hetp: reference F = nan Pa^0.5: expected a finite number >= 0";
    case 25:
        m->hetp_m = 0;
        return "hetp: hetp_m = 0: expected a finite number > 0";
    case 26:
        m->hetp_low_m = 0.5;
        return "hetp: interval [0.5, inf] m does not contain hetp_m = 0.2914 m";
    case 27:
        m->hetp_level = 0;
        return "hetp: level = 0: expected a number in (0, 1)";
    case 28:
        free(m->warnings[1]);
        m->warnings[1] = NULL;
        return "warning 2 is missing";
    case 29:
        m->latent_j_mol = NAN;
        return "system: latent_heat_j_mol = nan: expected a finite number > 0";
    case 30:
        m->m_light_kg_mol = -0.046;
        return "system: molar_mass_light_kg_mol = -0.046: expected a finite number > 0";
    case 31:
        m->m_heavy_kg_mol = INFINITY;
        return "system: molar_mass_heavy_kg_mol = inf: expected a finite number > 0";
    case 32: { /* a design needs more rows than parameters */
        const double x[] = {1, 0.5, 1, 0.2};
        assert_int_equal(stagecal_model_set_design(m, x, 2, NULL), STAGECAL_OK);
        return "design: 2 rows for 2 parameters (expected more rows than parameters)";
    }
    case 33: {
        const double x[] = {1, 0.5, 1, NAN, 1, 0.1};
        assert_int_equal(stagecal_model_set_design(m, x, 3, NULL), STAGECAL_OK);
        return "design[1][1] is not finite";
    }
    case 34: { /* the second column twice the first: no dof for any parameter */
        const double x[] = {1, 2, 0.5, 1, 0.25, 0.5};
        assert_int_equal(stagecal_model_set_design(m, x, 3, NULL), STAGECAL_OK);
        return "design: Bell-McCaffrey dof: the design is rank deficient";
    }
    default:
        return NULL;
    }
}

/* stagecal_model_check enforces every rule of the format, one message per rule; the
 * unbroken standard model passes. */
static void model_check_names_each_rule(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_error err;
    fill_model(&m, "saturating");
    assert_int_equal(stagecal_model_check(&m, &err), STAGECAL_OK);
    stagecal_model_free(&m);
    const char *want;
    for (int k = 0; fill_model(&m, "saturating"), (want = break_rule(&m, k)) != NULL; k++) {
        int rc = stagecal_model_check(&m, &err);
        if (rc != STAGECAL_EINVAL || strcmp(err.text, want) != 0)
            print_error("rule %d: got %d '%s'\n        want '%s'\n", k, rc, err.text, want);
        assert_int_equal(rc, STAGECAL_EINVAL);
        assert_string_equal(err.text, want);
        stagecal_model_free(&m);
    }
    stagecal_model_free(&m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(model_sha256_fips_vectors),
        cmocka_unit_test(model_sha256_matches_hashlib),
        cmocka_unit_test(model_hash_file_matches_fips),
        cmocka_unit_test(model_checksum_verifiable_in_python),
        cmocka_unit_test(model_roundtrip_exact),
        cmocka_unit_test(model_system_data_optional),
        cmocka_unit_test(model_write_names_file_after_fit_time),
        cmocka_unit_test(model_write_never_overwrites),
        cmocka_unit_test(model_write_unwritable_is_ewrite),
        cmocka_unit_test(model_kill9_leaves_no_partial_file),
        cmocka_unit_test(model_write_refuses_invalid_model),
        cmocka_unit_test(model_load_refuses_corrupt_and_truncated),
        cmocka_unit_test(model_load_refuses_hand_edit),
        cmocka_unit_test(model_load_refuses_newer_version),
        cmocka_unit_test(model_load_refuses_inconsistent),
        cmocka_unit_test(model_eval_matches_textbook_band),
        cmocka_unit_test(model_eval_after_load_matches_design_matrix),
        cmocka_unit_test(model_eval_uses_design_dof),
        cmocka_unit_test(model_eval_uses_design_run_dof),
        cmocka_unit_test(model_param_dof_is_each_parameters_own),
        cmocka_unit_test(model_eval_flags_extrapolation),
        cmocka_unit_test(model_eval_rejects_bad_arguments),
        cmocka_unit_test(model_add_helpers_validate),
        cmocka_unit_test(model_vle_roundtrip_every_kind),
        cmocka_unit_test(model_vle_parameters_are_named_inputs),
        cmocka_unit_test(model_vle_build_refuses_incomplete),
        cmocka_unit_test(model_load_refuses_each_member),
        cmocka_unit_test(model_parse_refuses_checksum_and_shape),
        cmocka_unit_test(model_check_names_each_rule),
    };
    return cmocka_run_group_tests(tests, group_setup, group_teardown);
}
