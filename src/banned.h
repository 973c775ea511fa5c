/*
 * banned.h — libc calls we never use (Git's idea): each becomes a compile error.
 * Use snprintf, memcpy with explicit lengths, strtod/strtol with end-pointer checks,
 * gmtime_r/localtime_r.
 */
#ifndef STAGECAL_BANNED_H
#define STAGECAL_BANNED_H

#define BANNED(func) sorry_##func##_is_a_banned_function

#undef sprintf
#define sprintf(...) BANNED(sprintf)
#undef strcpy
#define strcpy(x, y) BANNED(strcpy)
#undef strcat
#define strcat(x, y) BANNED(strcat)
#undef strncpy
#define strncpy(x, y, n) BANNED(strncpy)
#undef strtok
#define strtok(x, y) BANNED(strtok)
#undef atof
#define atof(x) BANNED(atof)
#undef atoi
#define atoi(x) BANNED(atoi)
#undef gmtime
#define gmtime(x) BANNED(gmtime)
#undef localtime
#define localtime(x) BANNED(localtime)

#endif
