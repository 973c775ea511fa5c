/* version.c — runtime version query (NLopt's nlopt_version idea). */
#include "stagecal/version.h"

const char *stagecal_version(void)
{
    return STAGECAL_VERSION_STRING;
}
