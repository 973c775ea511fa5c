/*
 * column_warn.c — warnings about a loaded column file that do not stop its use (see
 * stagecal_column_warnings in stagecal/column.h). The library keeps them as data on
 * the column; the command line prints them and calibration copies them into the
 * model file, so every output that uses the column shows the same text.
 */
#include "stagecal/column.h"

#include <stdio.h>
#include <string.h>

#include "internal.h"

/* The Antoine-range warning: the bubble curve at the column pressure spans
 * temperatures outside the range a stated Antoine set was fitted on. */
static void antoine_warning(stagecal_column *col)
{
    const stagecal_vle *vle = col->system.vle;
    unsigned flags = vle ? stagecal_vle_antoine_flags(vle) : 0;
    double lo, hi;
    if (flags == 0 || stagecal_vle_t_range(vle, &lo, &hi) != STAGECAL_OK)
        return;
    stagecal_vle_definition def;
    stagecal_vle_get_definition(vle, &def);
    const char *names[2] = {col->system.light, col->system.heavy};
    const unsigned bits[2] = {STAGECAL_VLE_ANTOINE_LIGHT, STAGECAL_VLE_ANTOINE_HEAVY};
    char sets[2 * (STAGECAL_NAME_MAX + 48)] = "";
    size_t len = 0;
    for (int i = 0; i < 2; i++) {
        if (!(flags & bits[i]) || len >= sizeof sets)
            continue;
        int k = snprintf(sets + len, sizeof sets - len, "%s%s [%.2f, %.2f] K",
                         len ? " and of " : "", names[i], def.ant[i].t_min_k, def.ant[i].t_max_k);
        if (k > 0)
            len += (size_t)k;
    }
    char text[STAGECAL_COLUMN_WARNING_MAX];
    /* A warning longer than its slot is cut, not refused (the names are bounded). */
    if (snprintf(text, sizeof text,
                 "column %s: the bubble curve at %.6g kPa spans [%.2f, %.2f] K, outside the stated "
                 "range of the Antoine set of %s; results are computed with it anyway",
                 col->id, stagecal_vle_pressure(vle) / 1000.0, lo, hi, sets) < 0)
        return;
    memcpy(col->warnings[col->n_warnings++], text, sizeof text);
}

void stagecal_column_warnings(stagecal_column *col)
{
    col->n_warnings = 0;
    antoine_warning(col);
}
