/*
 * model_file.c — the model file on disk: write (atomic, never replacing an earlier
 * file), load (bounded read, checksum, every field) and the SHA-256 of an input file.
 *
 * Writing: mkdir -p; the text goes through the one atomic writer (src/fileio.c: a
 * temporary file in the target folder, fsync, link to the final name, fsync of the
 * folder). The final name is fits/<column>/<column>-<YYYYMMDDTHHMMSSZ>.json; link()
 * fails with EEXIST instead of replacing a file, so when the name is taken a numbered
 * suffix (-2, -3, …) is tried next. Whatever is written is parsed back first: we
 * refuse to write what we would refuse to read.
 */
#include "stagecal/model.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "fileio.h"
#include "internal.h"
#include "model_internal.h"

/* Numbered suffixes tried before giving up on a free file name. */
static const unsigned MODEL_MAX_SUFFIX = 10000;

int stagecal_model_hash_file(const char *path, char hex[STAGECAL_MODEL_HEX], stagecal_error *err)
{
    fileio_data in;
    int rc = read_all(path, FILEIO_CAP_RUNLOG, "input file", 0, &in, err);
    if (rc != STAGECAL_OK)
        return rc;
    memcpy(hex, in.sha256, STAGECAL_MODEL_HEX);
    free(in.data);
    return STAGECAL_OK;
}

static void final_name(char *final, size_t cap, const char *dir, const char *column,
                       const char *stamp, unsigned n)
{
    if (n == 1)
        snprintf(final, cap, "%s/%s-%s.json", dir, column, stamp);
    else
        snprintf(final, cap, "%s/%s-%s-%u.json", dir, column, stamp, n);
}

int stagecal_model_write(const stagecal_model *m, const char *dir, char *path_out, size_t cap,
                         stagecal_error *err)
{
    char stamp[17];
    int rc = model_check(m, NULL, STAGECAL_EINVAL, err);
    if (rc != STAGECAL_OK)
        return rc;
    if (!dir || !dir[0])
        return error_set(err, STAGECAL_EINVAL, "model directory: expected a path");
    model_parse_utc(m->fitted_utc, stamp);

    char *text = model_render(m);
    if (!text)
        return error_set(err, STAGECAL_ENOMEM, "out of memory rendering the model file");
    {
        stagecal_model back;
        stagecal_error berr;
        stagecal_model_init(&back);
        int brc = stagecal_model_parse(text, strlen(text), "model", &back, &berr);
        stagecal_model_free(&back);
        if (brc != STAGECAL_OK) {
            free(text);
            return error_set(err, STAGECAL_EINTERNAL, "rendered model does not load: %s",
                             berr.text);
        }
    }

    size_t cap_path = strlen(dir) + strlen(m->column_id) + 64;
    char *final = malloc(cap_path);
    atomic_file a;
    atomic_init(&a);
    if (!final) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
        goto out;
    }
    final_name(final, cap_path, dir, m->column_id, stamp, 1);
    if ((rc = make_dirs(dir, err)) != STAGECAL_OK || (rc = atomic_open(&a, final, err)))
        goto out;
    if (atomic_write(&a, text, strlen(text), final, NULL) != STAGECAL_OK) {
        rc = error_set(err, STAGECAL_EWRITE, "cannot write a new file in '%s': %s", dir,
                       strerror(a.write_errno));
        goto out;
    }
    int exists = 1;
    for (unsigned n = 1; exists && n <= MODEL_MAX_SUFFIX; n++) {
        final_name(final, cap_path, dir, m->column_id, stamp, n);
        rc = atomic_publish(&a, final, ATOMIC_NEW, &exists, err);
    }
    if (exists)
        rc = error_set(err, STAGECAL_EWRITE, "no free file name for '%s-%s' in '%s' after %u tries",
                       m->column_id, stamp, dir, MODEL_MAX_SUFFIX);
    if (rc != STAGECAL_OK)
        goto out;
    if (path_out && copy_text(path_out, cap, final) != 0) {
        unlink(final); /* ours: link() created it a moment ago */
        rc = error_set(err, STAGECAL_EWRITE,
                       "path '%s' does not fit the caller's buffer (%zu bytes); the file "
                       "was removed again",
                       final, cap);
    }
out:
    atomic_discard(&a);
    free(text);
    free(final);
    return rc;
}

int stagecal_model_load(const char *path, stagecal_model *m, stagecal_error *err)
{
    fileio_data in;
    stagecal_model_free(m);
    int rc = read_all(path, FILEIO_CAP_MODEL, "model file", 0, &in, err);
    if (rc != STAGECAL_OK)
        return rc;
    rc = stagecal_model_parse(in.data, in.len, path, m, err);
    free(in.data);
    return rc;
}
