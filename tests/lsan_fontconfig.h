/*
 * lsan_fontconfig.h — the LeakSanitizer hook of the test programs that draw chart text
 * (tests/plot_testutil.h, tests/test_report.c); include it once per program.
 *
 * Sanitizer build only: fontconfig, loaded by cairo for the chart text, keeps its font
 * cache for the life of the process and never frees it; those blocks are reported as
 * leaks that are not ours. Every other leak still fails.
 */
#ifndef STAGECAL_LSAN_FONTCONFIG_H
#define STAGECAL_LSAN_FONTCONFIG_H

const char *__lsan_default_suppressions(void);
const char *__lsan_default_suppressions(void)
{
    return "leak:libfontconfig.so\n";
}

#endif
