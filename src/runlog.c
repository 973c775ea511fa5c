/*
 * runlog.c — reading and validating run logs (see stagecal/runlog.h, docs/runlog.md).
 *
 * The file is fed to libcsv one physical line at a time (cut from chunks read), so the row
 * callback knows the line number it ends on; cells are parsed and range-checked
 * in the field callback while their text is at hand (messages quote the text as
 * logged), and sequence checks (time increasing, W falling, xD ≥ xB) run at the
 * end of each row against the previous row of the same run. Storage is columnar
 * and grows geometrically (×2), so memory stays at a few doubles per row for
 * 10^6-row logs. Units are converted at the cell: mole-basis values to SI at
 * once; mass-basis values (kg, kg/kg, wt%, kg/h) at the end of the row, when the
 * composition needed for the molar mass is known.
 */
#include "stagecal/runlog.h"

#include <csv.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

#include "fileio.h"
#include "internal.h"
#include "stagecal/physics.h"
#include "runlog_internal.h"

/* ---- the reader -------------------------------------------------------------------- */

static const char *const role_names[STAGECAL_RL_NCOL] = {
    [STAGECAL_RL_TIME] = "time",    [STAGECAL_RL_W] = "W",     [STAGECAL_RL_XD] = "xD",
    [STAGECAL_RL_XB] = "xB",        [STAGECAL_RL_R] = "R",     [STAGECAL_RL_V] = "V",
    [STAGECAL_RL_Q] = "Q",          [STAGECAL_RL_P] = "P",     [STAGECAL_RL_TTOP] = "T_top",
    [STAGECAL_RL_TPOT] = "T_pot",   [STAGECAL_RL_RUN] = "run", [STAGECAL_RL_TREFLUX] = "T_reflux",
    [STAGECAL_RL_XDH] = "xD_heavy",
};

static const stagecal_quantity role_qty[STAGECAL_RL_NCOL] = {
    [STAGECAL_RL_TIME] = STAGECAL_QTY_TIME,        [STAGECAL_RL_W] = STAGECAL_QTY_AMOUNT,
    [STAGECAL_RL_XD] = STAGECAL_QTY_FRACTION,      [STAGECAL_RL_XB] = STAGECAL_QTY_FRACTION,
    [STAGECAL_RL_R] = STAGECAL_QTY_RATIO,          [STAGECAL_RL_V] = STAGECAL_QTY_FLOW,
    [STAGECAL_RL_Q] = STAGECAL_QTY_DUTY,           [STAGECAL_RL_P] = STAGECAL_QTY_PRESSURE,
    [STAGECAL_RL_TTOP] = STAGECAL_QTY_TEMPERATURE, [STAGECAL_RL_TPOT] = STAGECAL_QTY_TEMPERATURE,
    [STAGECAL_RL_RUN] = STAGECAL_QTY_LABEL,        [STAGECAL_RL_TREFLUX] = STAGECAL_QTY_TEMPERATURE,
    [STAGECAL_RL_XDH] = STAGECAL_QTY_FRACTION,
};

static int is_composition(int role)
{
    return role == STAGECAL_RL_XD || role == STAGECAL_RL_XB || role == STAGECAL_RL_XDH;
}

SC_PRINTF(5, 0)
static void vfinding(struct reader *rd, int sev, long line, const char *column, const char *fmt,
                     va_list ap)
{
    stagecal_findings *f = rd->f;
    if (!f)
        return;
    if (sev == STAGECAL_FINDING_ERROR)
        f->n_errors++;
    else
        f->n_warnings++;
    if (f->n >= f->max_items)
        return;
    if (f->n == f->cap) { /* a clean log has none: allocate only what arrives */
        size_t cap = f->cap ? 2 * f->cap : 16;
        if (cap > f->max_items)
            cap = f->max_items;
        stagecal_finding *items = realloc(f->items, cap * sizeof *items);
        if (!items)
            return; /* counted, not kept */
        f->items = items;
        f->cap = cap;
    }
    stagecal_finding *it = &f->items[f->n++];
    it->severity = sev;
    it->line = line;
    snprintf(it->source, sizeof it->source, "%s", rd->source);
    snprintf(it->column, sizeof it->column, "%s", column ? column : "");
    int k = line > 0 ? snprintf(it->text, sizeof it->text, "%s:%ld: ", rd->source, line)
                     : snprintf(it->text, sizeof it->text, "%s: ", rd->source);
    if (k < 0 || (size_t)k >= sizeof it->text)
        k = (int)strlen(it->text);
    vsnprintf(it->text + k, sizeof it->text - (size_t)k, fmt, ap);
}

void reader_finding(struct reader *rd, int sev, long line, const char *column, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vfinding(rd, sev, line, column, fmt, ap);
    va_end(ap);
}

/* Header failure that makes the file unusable: a finding and the call's error. */
void reader_fatal(struct reader *rd, long line, const char *column, const char *fmt, ...)
{
    va_list ap;
    char msg[300];
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    reader_finding(rd, STAGECAL_FINDING_ERROR, line, column, "%s", msg);
    if (!rd->fatal)
        error_set_at(rd->err, STAGECAL_EDATA, rd->source, line, 0, "%s", msg);
    rd->fatal = 1;
}

static int role_of(const char *name)
{
    for (int i = 0; i < STAGECAL_RL_NCOL; i++)
        if (strcmp(role_names[i], name) == 0)
            return i;
    return -1;
}

static int has_molar_masses(const stagecal_column *col)
{
    return col && col->system.m_light > 0 && col->system.m_heavy > 0;
}

static void header_cell(struct reader *rd, const char *cell)
{
    size_t i = rd->nhdr;
    if (i >= MAX_FIELDS) {
        if (i == MAX_FIELDS)
            reader_fatal(rd, rd->line, NULL, "more than %d columns", MAX_FIELDS);
        rd->nhdr++;
        return;
    }
    rd->nhdr++;
    snprintf(rd->hdr[i], HDR_MAX, "%s", cell);
    rd->role[i] = -1;
    char name[HDR_MAX], unit[HDR_MAX];
    int has_unit;
    stagecal_error e;
    if (stagecal_units_split(cell, name, sizeof name, unit, sizeof unit, &has_unit, &e) != 0) {
        char other = strchr(cell, ';') ? ';' : strchr(cell, '\t') ? '\t' : 0;
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, cell, "%s%s", e.text,
                       other && other != rd->sep
                           ? other == ';' ? "; the cell holds ';': a semicolon-separated file "
                                            "(--csv-dialect semicolon)?"
                                          : "; the cell holds a tab: a tab-separated file "
                                            "(--csv-dialect tab)?"
                           : "");
        return;
    }
    int role = role_of(name);
    if (role < 0) {
        reader_finding(
            rd, STAGECAL_FINDING_WARNING, rd->line, cell,
            "unknown column '%s' ignored (expected time, W, xD, xD_heavy, xB, R, V, Q, P, "
            "T_top, T_pot, T_reflux or run)",
            cell);
        return;
    }
    if (rd->field_of[role] >= 0) {
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, cell,
                       "duplicate column '%s' ignored (column '%s' came first)", cell,
                       rd->hdr[rd->field_of[role]]);
        return;
    }
    stagecal_unit u;
    const char *why = NULL;
    char msg[STAGECAL_ERROR_TEXT + 2 * HDR_MAX];
    if (stagecal_units_parse(role_qty[role], unit, &u, &e) != 0)
        why = e.text;
    else if (u.mass && !has_molar_masses(rd->col))
        why = "a mass basis needs the molar masses (expected a column file that states them)";
    else if (role == STAGECAL_RL_Q && !(rd->col && rd->col->system.latent_j_mol > 0))
        why = "a heat duty needs the latent heat (expected a column file that states it)";
    if (why) {
        /* present but unusable (not "missing"); fatal when the column is required */
        snprintf(msg, sizeof msg, "column '%s': %s", cell, why);
        rd->field_of[role] = -2;
        if (role <= STAGECAL_RL_R || role == STAGECAL_RL_XDH)
            reader_fatal(rd, rd->line, cell, "%s", msg);
        else
            reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, cell, "%s", msg);
        return;
    }
    rd->unit[role] = u;
    rd->field_of[role] = (int)i;
    rd->role[i] = role;
    if (role == STAGECAL_RL_TIME && u.iso8601)
        rd->log->nfiles_iso++;
}

/* Warnings for logged physics the column cannot use (docs/methods.md). */
static void runlog_physics_header_findings(struct reader *rd)
{
    const stagecal_column *col = rd->col;
    if (!col || !col->system.vle)
        return;
    int fp = rd->field_of[STAGECAL_RL_P], ft = rd->field_of[STAGECAL_RL_TREFLUX];
    if (fp >= 0 && !stagecal_vle_has_pressure(col->system.vle))
        reader_finding(
            rd, STAGECAL_FINDING_WARNING, rd->line, rd->hdr[fp],
            "column '%s': the equilibrium model '%s' has no temperature dependence, so the "
            "logged pressure cannot set it (expected a model with Antoine sets)",
            rd->hdr[fp], stagecal_vle_kind_name(stagecal_vle_get_kind(col->system.vle)));
    const stagecal_system *s = &col->system;
    if (ft >= 0 && (!(s->cp_liquid_j_mol_k > 0) || !stagecal_vle_has_temperature(s->vle) ||
                    !(s->latent_j_mol > 0 || s->latent_light_j_mol > 0)))
        reader_finding(rd, STAGECAL_FINDING_WARNING, rd->line, rd->hdr[ft],
                       "column '%s': the reflux temperature is not used (the internal reflux needs "
                       "system.cp_liquid_j_mol_k, a latent heat and a model with temperatures)",
                       rd->hdr[ft]);
}

static void header_done(struct reader *rd)
{
    if (rd->fatal) {
        rd->header_done = 1;
        return;
    }
    static const int required[] = {STAGECAL_RL_TIME, STAGECAL_RL_W, STAGECAL_RL_XD, STAGECAL_RL_XB,
                                   STAGECAL_RL_R};
    rd->header_done = 1;
    for (size_t k = 0; k < sizeof required / sizeof required[0]; k++) {
        int r = required[k];
        if (r == STAGECAL_RL_XD && rd->field_of[STAGECAL_RL_XDH] != -1)
            continue; /* xD_heavy gives the distillate */
        if (rd->field_of[r] == -1)
            reader_fatal(rd, rd->line, NULL,
                         "missing column '%s' (required: time, W, xD or xD_heavy, xB, R)",
                         r == STAGECAL_RL_XD ? "xD' or 'xD_heavy" : role_names[r]);
    }
    if (rd->field_of[STAGECAL_RL_V] >= 0 && rd->field_of[STAGECAL_RL_Q] >= 0) {
        int q = rd->field_of[STAGECAL_RL_Q];
        reader_finding(rd, STAGECAL_FINDING_WARNING, rd->line, rd->hdr[q],
                       "column '%s' ignored (column '%s' gives the boil-up)", rd->hdr[q],
                       rd->hdr[rd->field_of[STAGECAL_RL_V]]);
        rd->role[q] = -1;
        rd->field_of[STAGECAL_RL_Q] = -1;
    }
    if (rd->fatal)
        return;
    stagecal_runlog *log = rd->log;
    if (rd->field_of[STAGECAL_RL_V] >= 0 || rd->field_of[STAGECAL_RL_Q] >= 0)
        rd->oom |= runlog_ensure_optional(log, &log->v_mol_s);
    if (rd->field_of[STAGECAL_RL_P] >= 0)
        rd->oom |= runlog_ensure_optional(log, &log->p_pa);
    if (rd->field_of[STAGECAL_RL_TTOP] >= 0)
        rd->oom |= runlog_ensure_optional(log, &log->t_top_k);
    if (rd->field_of[STAGECAL_RL_TPOT] >= 0)
        rd->oom |= runlog_ensure_optional(log, &log->t_pot_k);
    if (runlog_soft_enabled(rd)) { /* the soft sensor marks what it infers (runlog_soft.c) */
        if (rd->field_of[STAGECAL_RL_TTOP] >= 0)
            rd->oom |= runlog_ensure_optional(log, &log->u_xd_inf);
        if (rd->field_of[STAGECAL_RL_TPOT] >= 0)
            rd->oom |= runlog_ensure_optional(log, &log->u_xb_inf);
    }
    if (rd->field_of[STAGECAL_RL_TREFLUX] >= 0)
        rd->oom |= runlog_ensure_optional(log, &log->t_reflux_k);
    runlog_physics_header_findings(rd);
}

/* The time cell's text for messages (a copy, truncated to 39 bytes). */
static void keep_time_text(struct reader *rd, const char *s, size_t len)
{
    char *d = rd->time_text[rd->tcur];
    size_t k = len < sizeof rd->time_text[0] ? len : sizeof rd->time_text[0] - 1;
    memcpy(d, s, k);
    d[k] = '\0';
}

/* Data cell i's text s[0, len), NUL-terminated; or, with term (the same address, writable),
 * a plain line's cell (reader_plain_line: no NUL byte, seven readable bytes after its end)
 * not yet terminated: it is parsed first and terminated after, so that its eight-byte loads
 * never wait on the store of the terminator. */
static inline __attribute__((always_inline)) void
data_cell_in(struct reader *rd, size_t i, const char *s, size_t len, char *term)
{
    int clean = term != NULL;
    if (i >= rd->nhdr || i >= MAX_FIELDS || rd->role[i] < 0)
        return;
    int role = rd->role[i];
    const char *h = rd->hdr[i];
    const stagecal_unit *u = &rd->unit[role];
    if (len == 0) {
        if (role != STAGECAL_RL_RUN && rd->nmissing[role]++ == 0)
            rd->first_missing[role] = rd->line;
        return;
    }
    double x = NAN;
    /* a plain decimal read to its end holds no NUL byte: the search is for the rest */
    int plain = role != STAGECAL_RL_RUN && !(role == STAGECAL_RL_TIME && u->iso8601) &&
                (clean ? runlog_parse_short(s, len, &x) == 0 || runlog_parse_padded(s, len, &x) == 0
                       : runlog_parse_plain(s, len, &x) == 0);
    if (clean)
        term[len] = '\0';
    if (!plain && !clean && memchr(s, '\0', len)) {
        reader_finding(
            rd, STAGECAL_FINDING_ERROR, rd->line, h,
            "column '%s': value contains a NUL byte (expected text; is the file UTF-16?)", h);
        return;
    }
    if (role == STAGECAL_RL_RUN) {
        size_t k = len < sizeof rd->run_text ? len : sizeof rd->run_text - 1;
        memcpy(rd->run_text, s, k); /* (truncated as snprintf would) */
        rd->run_text[k] = '\0';
        return;
    }
    char point[40]; /* a decimal comma ("12,5" in a ';'-separated file) read as a point */
    if (!plain && rd->decimal_comma && len < sizeof point && memchr(s, ',', len) &&
        !memchr(s, '.', len)) {
        memcpy(point, s, len + 1);
        *strchr(point, ',') = '.';
        s = point;
        plain = !(role == STAGECAL_RL_TIME && u->iso8601) && runlog_parse_plain(s, len, &x) == 0;
    }
    if (is_composition(role)) {
        if (plain && x > u->lo && x < u->hi) { /* runlog_parse_fraction's answer for these */
            rd->cens[role] = STAGECAL_CENSOR_NONE;
            rd->raw[role] = x;
            rd->val[role] = x * u->scale;
            return;
        }
        char why[STAGECAL_ERROR_TEXT];
        if (runlog_parse_fraction(s, u, plain, &x, &rd->cens[role], why, sizeof why) != 0) {
            reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, h, "column '%s': %s", h, why);
            return;
        }
        rd->raw[role] = x;
        rd->val[role] = x * u->scale;
        return;
    }
    if (role == STAGECAL_RL_TIME && u->iso8601) {
        if (stagecal_units_parse_iso8601(s, &x) != 0) {
            reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, h,
                           "column '%s': value '%s' is not an ISO 8601 timestamp", h, s);
            return;
        }
        keep_time_text(rd, s, len);
        rd->raw[role] = x;
        rd->val[role] = x;
        return;
    }
    if (!plain && runlog_parse_number(s, role == STAGECAL_RL_R, &x) != 0) {
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, h,
                       "column '%s': value '%s' is not a number", h, s);
        return;
    }
    if (u->qty == STAGECAL_QTY_TEMPERATURE && !(x >= u->lo)) {
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, h,
                       "column '%s': value '%s' is below absolute zero", h, s);
        return;
    }
    if (role == STAGECAL_RL_R && x < 0) {
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, h,
                       "column '%s': value '%s' is negative (expected R >= 0 or inf)", h, s);
        return;
    }
    if (u->lo == 0 && x < 0) {
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, h,
                       "column '%s': value '%s' is negative (expected a value >= 0)", h, s);
        return;
    }
    if (role == STAGECAL_RL_W && x == 0) {
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, h,
                       "column '%s': value '%s' is zero (expected W > 0: an empty pot does "
                       "not boil)",
                       h, s);
        return;
    }
    if (role == STAGECAL_RL_TIME)
        keep_time_text(rd, s, len);
    rd->raw[role] = x;
    rd->val[role] = x * u->scale + u->offset;
}

static void data_cell(struct reader *rd, const char *s, size_t len)
{
    data_cell_in(rd, rd->field++, s, len, NULL);
}

void reader_plain_line(struct reader *rd, char *s, size_t n)
{
    unsigned char sep = (unsigned char)rd->sep;
    /* the cells of a data row go to data_cell_in at once (which terminates them): the tests of
     * reader_on_field give the same answer for every cell of the row (no cell sets oom, fatal
     * or header_done) */
    int data = !rd->oom && rd->header_done && !rd->fatal;
    char *f = s;
    size_t field = rd->field; /* (the cell count kept here, stored for the row's end) */
#if defined(__GNUC__) && defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    /* the separators eight bytes at a time: the exact zero-byte mask of w ^ sep·ones (common
     * bit-twiddling practice, no source; exact, so every flagged byte is a separator), each
     * cut in order, the lowest byte first; in the word that holds s[n] the bytes from s[n] on
     * are read (the pad) but only s[n] is flagged: the last cell's end */
    const uint64_t sepw = 0x0101010101010101u * sep, low7 = 0x7F7F7F7F7F7F7F7Fu;
    for (size_t i = 0; i <= n; i += 8) {
        uint64_t w, x, z;
        memcpy(&w, s + i, 8);
        x = w ^ sepw;
        z = ~(((x & low7) + low7) | x | low7);
        if (n - i < 8) {
            unsigned b = 8 * (unsigned)(n - i);
            z = (z & (((uint64_t)1 << b) - 1)) | ((uint64_t)0x80 << b);
        }
        for (; z; z &= z - 1) {
            char *d = s + i + ((unsigned)__builtin_ctzll(z) >> 3);
            if (data) {
                data_cell_in(rd, field++, f, (size_t)(d - f), f);
            } else {
                *d = '\0';
                reader_on_field(f, (size_t)(d - f), rd);
                field = rd->field;
            }
            f = d + 1;
        }
    }
#else
    for (size_t i = 0; i <= n; i++)
        if (i == n || (unsigned char)s[i] == sep) {
            if (data) {
                data_cell_in(rd, field++, f, (size_t)(s + i - f), f);
            } else {
                s[i] = '\0';
                reader_on_field(f, (size_t)(s + i - f), rd);
                field = rd->field;
            }
            f = s + i + 1;
        }
#endif
    rd->field = field;
    reader_on_row('\n', rd);
}

void reader_on_field(void *s, size_t len, void *data)
{
    struct reader *rd = data;
    if (rd->oom)
        return;
    if (!rd->header_done) {
        const char *cell = s ? (const char *)s : "";
        if (rd->fatal)
            return; /* the header is already unusable: one message is enough */
        if (rd->nhdr == 0 && rd->line <= 1) {
            /* a UTF-8 byte-order mark (spreadsheet exports) is not part of the name */
            if (len >= 3 && memcmp(cell, "\xEF\xBB\xBF", 3) == 0)
                cell += 3;
            else if (len >= 2 &&
                     (memcmp(cell, "\xFF\xFE", 2) == 0 || memcmp(cell, "\xFE\xFF", 2) == 0)) {
                reader_fatal(
                    rd, rd->line, NULL,
                    "the file is UTF-16 encoded (byte-order mark); expected UTF-8 or ASCII "
                    "text (save or export it as UTF-8 CSV)");
                return;
            }
        }
        if (s && strlen((const char *)s) != len) {
            reader_fatal(
                rd, rd->line, NULL,
                "the header contains NUL bytes (UTF-16 without a byte-order mark?); expected "
                "UTF-8 or ASCII text");
            return;
        }
        header_cell(rd, cell);
    } else if (!rd->fatal)
        data_cell(rd, s ? (const char *)s : "", s ? len : 0);
}

static double molar_mass(const stagecal_column *col, double x)
{
    return x * col->system.m_light + (1.0 - x) * col->system.m_heavy;
}

/* A composition (mole or mass fraction of the component it names) to a light-component
 * mole fraction; censoring is kept (the conversion is increasing). heavy: the cell
 * names the heavy component, so both the fraction and the censoring flip. */
static double to_light_mole(const struct reader *rd, int role, double x, int *censor)
{
    const stagecal_unit *u = &rd->unit[role];
    const stagecal_system *sys = rd->col ? &rd->col->system : NULL;
    int heavy = role == STAGECAL_RL_XDH;
    if (u->mass)
        x = heavy ? stagecal_vle_mass_to_mole(x, sys->m_heavy, sys->m_light)
                  : stagecal_vle_mass_to_mole(x, sys->m_light, sys->m_heavy);
    if (!heavy)
        return x;
    if (*censor != STAGECAL_CENSOR_NONE)
        *censor = *censor == STAGECAL_CENSOR_BELOW ? STAGECAL_CENSOR_ABOVE : STAGECAL_CENSOR_BELOW;
    return 1.0 - x;
}

/* The row's xD and xB as light mole fractions: mass basis converted, xD_heavy (when the
 * row has it) in place of xD, and a disagreement between the two noted. */
static void distillate(struct reader *rd)
{
    double *v = rd->val;
    int *c = rd->cens;
    if (!isnan(v[STAGECAL_RL_XB]))
        v[STAGECAL_RL_XB] =
            to_light_mole(rd, STAGECAL_RL_XB, v[STAGECAL_RL_XB], &c[STAGECAL_RL_XB]);
    if (!isnan(v[STAGECAL_RL_XD]))
        v[STAGECAL_RL_XD] =
            to_light_mole(rd, STAGECAL_RL_XD, v[STAGECAL_RL_XD], &c[STAGECAL_RL_XD]);
    if (isnan(v[STAGECAL_RL_XDH]))
        return; /* no heavy reading: xD (if any) stands */
    double xh = to_light_mole(rd, STAGECAL_RL_XDH, v[STAGECAL_RL_XDH], &c[STAGECAL_RL_XDH]);
    if (!isnan(v[STAGECAL_RL_XD])) {
        /* both read the distillate: do their ranges meet within 3 combined uncertainties? */
        double lo1, hi1, lo2, hi2;
        runlog_reading_range(v[STAGECAL_RL_XD], c[STAGECAL_RL_XD], &lo1, &hi1);
        runlog_reading_range(xh, c[STAGECAL_RL_XDH], &lo2, &hi2);
        double ua = rd->col ? rd->col->u.xd : 0.0, ub = stagecal_runlog_u_xd(rd->col, xh);
        double tol = DISAGREE_SIGMAS * sqrt(ua * ua + ub * ub) + 1e-12;
        if (lo1 - hi2 > tol || lo2 - hi1 > tol) {
            if (rd->ndisagree < DISAGREE_LINES)
                rd->disagree_line[rd->ndisagree] = rd->line;
            rd->ndisagree++;
        }
    }
    v[STAGECAL_RL_XD] = xh;
    c[STAGECAL_RL_XD] = c[STAGECAL_RL_XDH];
}

void reader_disagree_warning(struct reader *rd)
{
    if (!rd->ndisagree)
        return;
    char lines[DISAGREE_LINES * 12 + 8] = "";
    size_t k = 0, shown = rd->ndisagree < DISAGREE_LINES ? rd->ndisagree : DISAGREE_LINES;
    for (size_t i = 0; i < shown; i++)
        k += (size_t)snprintf(lines + k, sizeof lines - k, "%s%ld", i ? ", " : "",
                              rd->disagree_line[i]);
    if (rd->ndisagree > shown)
        snprintf(lines + k, sizeof lines - k, ", ...");
    const char *hd = rd->hdr[rd->field_of[STAGECAL_RL_XD]];
    const char *hh = rd->hdr[rd->field_of[STAGECAL_RL_XDH]];
    reader_finding(
        rd, STAGECAL_FINDING_WARNING, 0, hh,
        "columns '%s' and '%s' disagree by more than %g standard uncertainties on %zu rows "
        "(line%s %s); '%s' is used",
        hd, hh, DISAGREE_SIGMAS, rd->ndisagree, rd->ndisagree > 1 ? "s" : "", lines, hh);
}

int reader_start_run(struct reader *rd, const char *name)
{
    stagecal_runlog *log = rd->log;
    stagecal_runlog_run *runs = realloc(log->runs, (log->nruns + 1) * sizeof *runs);
    if (!runs)
        return -1;
    log->runs = runs;
    stagecal_runlog_run *r = &runs[log->nruns];
    memset(r, 0, sizeof *r);
    snprintf(r->name, sizeof r->name, "%s", name);
    r->file = rd->file;
    r->first = log->n;
    r->first_line = rd->line;
    if (rd->nnames == rd->names_cap) {
        size_t cap = rd->names_cap ? 2 * rd->names_cap : 16;
        char(*names)[64] = realloc(rd->names, cap * sizeof *names);
        if (!names)
            return -1;
        rd->names = names;
        rd->names_cap = cap;
    }
    memcpy(rd->names[rd->nnames++], r->name, sizeof r->name);
    rd->cur_run = log->nruns++;
    rd->have_run = 1;
    rd->prev_t_ok = 0;
    return 0;
}

void reader_close_run(struct reader *rd)
{
    if (!rd->have_run)
        return;
    runlog_w_rise_findings(rd);
    stagecal_runlog_run *r = &rd->log->runs[rd->cur_run];
    if (r->n < rd->par.min_rows)
        reader_finding(rd, STAGECAL_FINDING_ERROR, r->first_line, NULL,
                       "run '%s' has %zu rows (expected at least %zu)", r->name, r->n,
                       rd->par.min_rows);
    runlog_soft_run(rd);                                                 /* runlog_soft.c */
    rd->oom |= runlog_setpoints_run(rd->log, rd->cur_run, rd->col) != 0; /* runlog_setpoint.c */
}

static void end_row(struct reader *rd)
{
    stagecal_runlog *log = rd->log;
    const stagecal_column *col = rd->col;
    double *v = rd->val;
    if (rd->field != rd->nhdr) {
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, NULL, "%zu fields, expected %zu",
                       rd->field, rd->nhdr);
        return;
    }
    const stagecal_unit *u = rd->unit;
    distillate(rd);
    if (u[STAGECAL_RL_W].mass)
        v[STAGECAL_RL_W] = v[STAGECAL_RL_W] / molar_mass(col, v[STAGECAL_RL_XB]); /* NaN if xB is */
    if (rd->field_of[STAGECAL_RL_RUN] < 0 &&
        runlog_split_row(rd, v[STAGECAL_RL_TIME], v[STAGECAL_RL_W], rd->raw[STAGECAL_RL_W]) < 0) {
        rd->oom = 1;
        return;
    }
    /* The run this row belongs to (runs are contiguous). */
    const char *name = rd->field_of[STAGECAL_RL_RUN] >= 0 && rd->run_text[0] ? rd->run_text
                       : rd->have_run ? log->runs[rd->cur_run].name
                                      : rd->source;
    if (!rd->have_run || strcmp(name, log->runs[rd->cur_run].name) != 0) {
        char prev[64] = "";
        if (rd->have_run)
            snprintf(prev, sizeof prev, "%s", log->runs[rd->cur_run].name);
        for (size_t k = 0; rd->have_run && k < rd->nnames; k++)
            if (strcmp(rd->names[k], name) == 0) {
                reader_finding(
                    rd, STAGECAL_FINDING_ERROR, rd->line, NULL,
                    "run '%s' resumes after run '%s' (expected the rows of a run together)", name,
                    prev);
                break;
            }
        reader_close_run(rd);
        if (reader_start_run(rd, name) != 0) {
            rd->oom = 1;
            return;
        }
    }
    double vap = NAN;
    if (rd->field_of[STAGECAL_RL_V] >= 0) {
        vap = v[STAGECAL_RL_V];
        if (u[STAGECAL_RL_V].mass) /* the vapour at the top has the distillate's composition */
            vap /= molar_mass(col, v[STAGECAL_RL_XD]);
    } else if (rd->field_of[STAGECAL_RL_Q] >= 0) {
        vap = v[STAGECAL_RL_Q] / col->system.latent_j_mol;
    }

    /* Sequence checks against the previous row of this run. */
    const char *ht = rd->hdr[rd->field_of[STAGECAL_RL_TIME]];
    double t = v[STAGECAL_RL_TIME];
    if (!isnan(t)) {
        if (rd->prev_t_ok && !(t > rd->prev_t))
            reader_finding(
                rd, STAGECAL_FINDING_ERROR, rd->line, ht,
                "column '%s': time '%s' is not after the previous sample's '%s' (expected "
                "increasing time within run '%s')",
                ht, rd->time_text[rd->tcur], rd->time_text[!rd->tcur], log->runs[rd->cur_run].name);
        rd->prev_t = t;
        rd->prev_t_ok = 1;
        rd->tcur = !rd->tcur; /* this row's text is now the previous one */
    }
    double w = v[STAGECAL_RL_W], r = v[STAGECAL_RL_R];
    double xd = v[STAGECAL_RL_XD], xb = v[STAGECAL_RL_XB];
    int cd = rd->cens[STAGECAL_RL_XD], cb = rd->cens[STAGECAL_RL_XB];
    /* false when either is missing, or when censoring leaves room for xD >= xB */
    if (xd < xb && cd != STAGECAL_CENSOR_ABOVE && cb != STAGECAL_CENSOR_BELOW)
        reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, rd->hdr[rd->field_of[STAGECAL_RL_XD]],
                       "xD %.6g is below xB %.6g (expected xD >= xB in a rectifier)", xd, xb);

    if (log->n == log->cap && runlog_grow_rows(log) != 0) {
        rd->oom = 1;
        return;
    }
    size_t n = log->n++;
    if (runlog_keep_raw_w(rd, n, rd->raw[STAGECAL_RL_W]) != 0) {
        rd->oom = 1;
        return;
    }
    if (!isnan(t) && !isnan(w) && !isnan(xd) && !isnan(xb) && !isnan(r))
        rd->complete_rows++;
    log->t_s[n] = t;
    log->w_mol[n] = w;
    log->xd[n] = xd;
    log->xb[n] = xb;
    log->xd_cens[n] = (unsigned char)(isnan(xd) ? 0 : cd);
    log->xb_cens[n] = (unsigned char)(isnan(xb) ? 0 : cb);
    log->r[n] = r;
    if (log->v_mol_s)
        log->v_mol_s[n] = vap;
    if (log->p_pa)
        log->p_pa[n] = rd->field_of[STAGECAL_RL_P] >= 0 ? v[STAGECAL_RL_P] : NAN;
    if (log->t_top_k)
        log->t_top_k[n] = rd->field_of[STAGECAL_RL_TTOP] >= 0 ? v[STAGECAL_RL_TTOP] : NAN;
    if (log->t_pot_k)
        log->t_pot_k[n] = rd->field_of[STAGECAL_RL_TPOT] >= 0 ? v[STAGECAL_RL_TPOT] : NAN;
    if (log->t_reflux_k)
        log->t_reflux_k[n] = rd->field_of[STAGECAL_RL_TREFLUX] >= 0 ? v[STAGECAL_RL_TREFLUX] : NAN;
    log->line[n] = (uint32_t)rd->line;
    log->run[n] = (uint32_t)rd->cur_run;
    log->runs[rd->cur_run].n++;
    rd->file_rows++;
}

void reader_on_row(int c, void *data)
{
    struct reader *rd = data;
    (void)c;
    if (rd->oom)
        return;
    if (!rd->header_done) {
        header_done(rd);
    } else if (!rd->fatal) {
        end_row(rd);
    }
    /* reset the row */
    rd->field = 0;
    for (int i = 0; i < STAGECAL_RL_NCOL; i++) {
        rd->val[i] = rd->raw[i] = NAN;
        rd->cens[i] = STAGECAL_CENSOR_NONE;
    }
    rd->run_text[0] = '\0';
    rd->time_text[rd->tcur][0] = '\0';
}
