/*
 * units.c — unit tables for run-log headers and ISO 8601 timestamps (see
 * stagecal/units.h). Conversion factors are exact by definition (1 lb =
 * 0.45359237 kg, 1 h = 3600 s, 0 °C = 273.15 K, 1 bar = 1e5 Pa).
 * The calendar conversion uses the proleptic Gregorian day count (days from
 * civil date, the algorithm every date library uses); no libc time zone state is
 * touched, so results do not depend on TZ or locale.
 */
#include "stagecal/units.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

struct unit_row {
    stagecal_quantity qty;
    const char *text;
    double scale, offset;
    int mass;
    int iso8601;
    double lo, hi;
};

#define NOLIM (-HUGE_VAL)

static const struct unit_row unit_table[] = {
    {STAGECAL_QTY_TIME, "h", STAGECAL_UNIT_H, 0, 0, 0, NOLIM, HUGE_VAL},
    {STAGECAL_QTY_TIME, "min", 60.0, 0, 0, 0, NOLIM, HUGE_VAL},
    {STAGECAL_QTY_TIME, "s", 1.0, 0, 0, 0, NOLIM, HUGE_VAL},
    {STAGECAL_QTY_TIME, "iso8601", 1.0, 0, 0, 1, NOLIM, HUGE_VAL},
    {STAGECAL_QTY_TIME, "ISO 8601", 1.0, 0, 0, 1, NOLIM, HUGE_VAL},
    {STAGECAL_QTY_AMOUNT, "kmol", STAGECAL_UNIT_KMOL, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_AMOUNT, "mol", 1.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_AMOUNT, "kg", 1.0, 0, 1, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_AMOUNT, "lb", 0.45359237, 0, 1, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_FRACTION, "mol/mol", 1.0, 0, 0, 0, 0, 1},
    {STAGECAL_QTY_FRACTION, "mol%", 0.01, 0, 0, 0, 0, 100},
    {STAGECAL_QTY_FRACTION, "ppm", 1e-6, 0, 0, 0, 0, 1e6}, /* µmol/mol */
    {STAGECAL_QTY_FRACTION, "kg/kg", 1.0, 0, 1, 0, 0, 1},
    {STAGECAL_QTY_FRACTION, "wt%", 0.01, 0, 1, 0, 0, 100},
    {STAGECAL_QTY_FRACTION, "ppmw", 1e-6, 0, 1, 0, 0, 1e6}, /* mg/kg */
    {STAGECAL_QTY_RATIO, "-", 1.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_RATIO, "", 1.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_FLOW, "kmol/h", STAGECAL_UNIT_KMOL_H, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_FLOW, "mol/s", 1.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_FLOW, "kg/h", 1.0 / 3600.0, 0, 1, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_DUTY, "kW", 1000.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_DUTY, "W", 1.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_DUTY, "MW", 1e6, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_PRESSURE, "kPa", 1000.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_PRESSURE, "Pa", 1.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_PRESSURE, "bar", 1e5, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_PRESSURE, "mbar", 100.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_TEMPERATURE, "C", 1.0, 273.15, 0, 0, -273.15, HUGE_VAL},
    {STAGECAL_QTY_TEMPERATURE, "K", 1.0, 0, 0, 0, 0, HUGE_VAL},
    {STAGECAL_QTY_LABEL, "", 1.0, 0, 0, 0, NOLIM, HUGE_VAL},
};

static const char *const expected_text[] = {
    [STAGECAL_QTY_TIME] = "h, min, s or iso8601",
    [STAGECAL_QTY_AMOUNT] = "kmol, mol, kg or lb",
    [STAGECAL_QTY_FRACTION] = "mol/mol, mol%, ppm, kg/kg, wt% or ppmw",
    [STAGECAL_QTY_RATIO] = "- or no unit",
    [STAGECAL_QTY_FLOW] = "kmol/h, mol/s or kg/h",
    [STAGECAL_QTY_DUTY] = "kW, W or MW",
    [STAGECAL_QTY_PRESSURE] = "kPa, Pa, bar or mbar",
    [STAGECAL_QTY_TEMPERATURE] = "C or K",
    [STAGECAL_QTY_LABEL] = "no unit",
};

const char *stagecal_units_expected(stagecal_quantity qty)
{
    if ((unsigned)qty >= sizeof expected_text / sizeof expected_text[0])
        return "";
    return expected_text[qty];
}

int stagecal_units_parse(stagecal_quantity qty, const char *text, stagecal_unit *u,
                         stagecal_error *err)
{
    for (size_t i = 0; i < sizeof unit_table / sizeof unit_table[0]; i++) {
        const struct unit_row *r = &unit_table[i];
        if (r->qty != qty || strcmp(r->text, text) != 0)
            continue;
        *u = (stagecal_unit){.qty = qty,
                             .scale = r->scale,
                             .offset = r->offset,
                             .mass = r->mass,
                             .iso8601 = r->iso8601,
                             .lo = r->lo,
                             .hi = r->hi};
        snprintf(u->text, sizeof u->text, "%s", text);
        return STAGECAL_OK;
    }
    return error_set(err, STAGECAL_EINVAL, "unknown unit '%s' (expected %s)", text,
                     stagecal_units_expected(qty));
}

/* Copies [b, e) without surrounding blanks into out; -1 when it does not fit. */
static int copy_trimmed(const char *b, const char *e, char *out, size_t len)
{
    while (b < e && isspace((unsigned char)*b))
        b++;
    while (e > b && isspace((unsigned char)e[-1]))
        e--;
    if ((size_t)(e - b) >= len)
        return -1;
    memcpy(out, b, (size_t)(e - b));
    out[e - b] = '\0';
    return 0;
}

int stagecal_units_split(const char *cell, char *name, size_t name_len, char *unit, size_t unit_len,
                         int *has_unit, stagecal_error *err)
{
    const char *open = strchr(cell, '[');
    const char *close = strchr(cell, ']');
    const char *end = cell + strlen(cell);
    *has_unit = 0;
    if (!open && !close) {
        if (copy_trimmed(cell, end, name, name_len) != 0)
            return error_set(err, STAGECAL_EINVAL, "header '%s' is too long", cell);
        unit[0] = '\0';
        return STAGECAL_OK;
    }
    /* Exactly one '[' before exactly one ']', nothing but blanks after it. */
    const char *after = close ? close + 1 : end;
    while (*after && isspace((unsigned char)*after))
        after++;
    if (!open || !close || close < open || strchr(open + 1, '[') || strchr(close + 1, ']') ||
        *after != '\0')
        return error_set(err, STAGECAL_EINVAL, "header '%s' is malformed (expected name[unit])",
                         cell);
    if (copy_trimmed(cell, open, name, name_len) != 0 ||
        copy_trimmed(open + 1, close, unit, unit_len) != 0)
        return error_set(err, STAGECAL_EINVAL, "header '%s' is too long", cell);
    *has_unit = 1;
    return STAGECAL_OK;
}

/* Reads exactly n decimal digits at *p into *v and advances. */
static int digits(const char **p, int n, int *v)
{
    int r = 0;
    for (int i = 0; i < n; i++) {
        if (!isdigit((unsigned char)(*p)[i]))
            return -1;
        r = 10 * r + ((*p)[i] - '0');
    }
    *p += n;
    *v = r;
    return 0;
}

/* Days since 1970-01-01 of a proleptic Gregorian date (era-based day count). */
static long days_from_civil(long y, int m, int d)
{
    y -= m <= 2;
    long era = (y >= 0 ? y : y - 399) / 400;
    long yoe = y - era * 400;
    long doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
    long doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    return era * 146097 + doe - 719468;
}

static int month_days(int y, int m)
{
    static const int md[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    int leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    return m == 2 ? 28 + leap : md[m - 1];
}

int stagecal_units_parse_iso8601(const char *text, double *t_s)
{
    const char *p = text;
    int y, mo, d, h, mi, s = 0;
    double frac = 0.0;
    if (digits(&p, 4, &y) || *p++ != '-' || digits(&p, 2, &mo) || *p++ != '-' || digits(&p, 2, &d))
        return -1;
    if (*p != 'T' && *p != ' ')
        return -1;
    p++;
    if (digits(&p, 2, &h) || *p++ != ':' || digits(&p, 2, &mi))
        return -1;
    if (*p == ':') {
        p++;
        if (digits(&p, 2, &s))
            return -1;
        if (*p == '.' || *p == ',') {
            double scale = 0.1;
            p++;
            if (!isdigit((unsigned char)*p))
                return -1;
            while (isdigit((unsigned char)*p)) {
                frac += scale * (*p - '0');
                scale *= 0.1;
                p++;
            }
        }
    }
    long zone_s = 0;
    if (*p == 'Z') {
        p++;
    } else if (*p == '+' || *p == '-') {
        int sign = *p == '-' ? -1 : 1, zh, zm = 0;
        p++;
        if (digits(&p, 2, &zh))
            return -1;
        if (*p == ':')
            p++;
        if (isdigit((unsigned char)*p) && digits(&p, 2, &zm))
            return -1;
        if (zh > 23 || zm > 59)
            return -1;
        zone_s = sign * (zh * 3600L + zm * 60L);
    }
    if (*p != '\0')
        return -1;
    if (mo < 1 || mo > 12 || d < 1 || d > month_days(y, mo) || h > 23 || mi > 59 || s > 59)
        return -1;
    long days = days_from_civil(y, mo, d);
    *t_s = (double)days * 86400.0 + h * 3600.0 + mi * 60.0 + s + frac - (double)zone_s;
    return 0;
}
