/*
 * convention.c — the stage convention, the column-id rule and the caution text (see
 * stagecal/convention.h). The two convention sentences are part of the model-file
 * format (docs/model-file.md: a loaded file's "stage_convention.text" must equal
 * stagecal_convention_text of its condenser), so they never change wording.
 */
#include "stagecal/convention.h"

#include <math.h>
#include <string.h>

#include "internal.h"

static const char caution[] =
    "Caution: batch distillation handles flammable and often toxic liquids under heat. "
    "These results are an empirical fit that supports engineering judgement; they do not "
    "replace it. Conditions outside the fitted envelope are extrapolations and are flagged "
    "as such. Local codes, site procedures and a licensed engineer's review come first.";

const char *stagecal_caution_text(void)
{
    return caution;
}

const char *stagecal_condenser_name(stagecal_condenser c)
{
    return c == STAGECAL_CONDENSER_PARTIAL ? "partial" : "total";
}

int stagecal_condenser_parse(const char *text, stagecal_condenser *c, stagecal_error *err)
{
    if (text && strcmp(text, "total") == 0) {
        *c = STAGECAL_CONDENSER_TOTAL;
        return STAGECAL_OK;
    }
    if (text && strcmp(text, "partial") == 0) {
        *c = STAGECAL_CONDENSER_PARTIAL;
        return STAGECAL_OK;
    }
    return error_set(err, STAGECAL_EINVAL, "condenser '%s' is not \"total\" or \"partial\"",
                     text ? text : "");
}

double stagecal_convention_outside(stagecal_condenser c)
{
    return c == STAGECAL_CONDENSER_PARTIAL ? 2.0 : 1.0;
}

double stagecal_convention_column_stages(double stages, stagecal_condenser c)
{
    double outside = stagecal_convention_outside(c);
    if (!isfinite(stages) || stages < outside)
        return NAN;
    return stages - outside;
}

double stagecal_convention_stages(double column_stages, stagecal_condenser c)
{
    return column_stages + stagecal_convention_outside(c);
}

const char *stagecal_convention_text(stagecal_condenser c)
{
    if (c == STAGECAL_CONDENSER_PARTIAL)
        return "stages include the pot; column stages = stages - 2; the partial condenser "
               "is an equilibrium stage";
    return "stages include the pot; column stages = stages - 1; total condenser not a stage";
}

const char *stagecal_convention_text_any(void)
{
    return "stages include the pot; column stages = stages - 1 with a total condenser (not a "
           "stage), stages - 2 with a partial condenser (an equilibrium stage)";
}

int stagecal_convention_id_valid(const char *id)
{
    if (!id || !id[0] || id[0] == '.' || strlen(id) >= STAGECAL_NAME_MAX)
        return 0;
    for (const char *s = id; *s; s++)
        if (!((*s >= 'A' && *s <= 'Z') || (*s >= 'a' && *s <= 'z') || (*s >= '0' && *s <= '9') ||
              *s == '_' || *s == '.' || *s == '-'))
            return 0;
    return 1;
}

const char *stagecal_convention_id_rule(void)
{
    return "letters, digits, '_', '.', '-' (not starting with '.')";
}
