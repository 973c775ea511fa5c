/*
 * csv_cells.h — reading numbers back from the CSV lines the tests write or read (the demo
 * logs, stagecal's run-log output): a column found by its header, a cell as a number.
 */
#ifndef STAGECAL_TESTS_CSV_CELLS_H
#define STAGECAL_TESTS_CSV_CELLS_H

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Column of a CSV header whose name starts with name followed by '[', or −1. */
static inline int header_index(const char *header, const char *name)
{
    int idx = 0;
    for (const char *p = header; *p; idx++) {
        if (strncmp(p, name, strlen(name)) == 0 && p[strlen(name)] == '[')
            return idx;
        p = strchr(p, ',');
        if (!p)
            break;
        p++;
    }
    return -1;
}

/* Cell idx of a CSV line as a number (NaN when empty or not a number). */
static inline double cell(const char *line, int idx)
{
    const char *p = line;
    for (int i = 0; i < idx && p; i++) {
        p = strchr(p, ',');
        if (p)
            p++;
    }
    if (!p || *p == ',' || *p == '\n' || *p == '\0')
        return NAN;
    char *end;
    double v = strtod(p, &end);
    return end == p ? NAN : v;
}

#endif
