/* stagecal/version.h — library version. */
#ifndef STAGECAL_VERSION_H
#define STAGECAL_VERSION_H
#ifdef __cplusplus
extern "C" {
#endif
/* "MAJOR.MINOR.PATCH" of the library actually linked. */
const char *stagecal_version(void);
#ifdef __cplusplus
}
#endif
#endif
