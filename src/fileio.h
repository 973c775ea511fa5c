/*
 * fileio.h — the one way files are read and written (internal; no stagecal_ prefix).
 *
 * Reading: read_all() takes a whole input file into memory and hashes it (SHA-256) in
 * the same pass; open_bounded() gives a stream for the readers that parse as they go.
 * Both accept only regular files (or "-", stdin, where the caller allows it), open them
 * non-blocking so that a FIFO without a writer cannot hang, check the kind and size
 * with fstat before the first byte is read, and refuse a file over the size limit of
 * its kind (FILEIO_CAP_*, listed in docs/bad-inputs.md) with a message naming it.
 *
 * Writing: an atomic_file is a temporary file in the target's folder (unnamed with
 * Linux O_TMPFILE where the file system has it, else mkstemp). Everything is written
 * there and checked (every write, the flush, fsync, close); only then is it published
 * under its final name — by link(), which never replaces an existing file, or by
 * rename(), which replaces one (only where the caller documents it) — and the folder
 * is fsync'ed. A writer killed at any moment leaves the final name untouched; on
 * failure the temporary file (ours only) is removed. On Linux the writeback of what has
 * been written starts while the writing goes on (sync_file_range, a few MiB behind the
 * write position), so the final fsync waits only for the tail; the fsync itself stays.
 */
#ifndef STAGECAL_FILEIO_H
#define STAGECAL_FILEIO_H

#include <stddef.h>
#include <stdio.h>
#include <sys/types.h>

#include "internal_sha256.h"
#include "stagecal/error.h"

/* Size limits of the inputs, bytes (docs/bad-inputs.md, "Size limits"). */
#define FILEIO_CAP_COLUMN ((size_t)16 << 20)  /* column file (JSON): 16 MiB */
#define FILEIO_CAP_MODEL ((size_t)16 << 20)   /* model file (JSON): 16 MiB */
#define FILEIO_CAP_PLAN ((size_t)1 << 20)     /* plan file (JSON): 1 MiB */
#define FILEIO_CAP_EVENTS ((size_t)4 << 20)   /* events file (CSV): 4 MiB */
#define FILEIO_CAP_POINTS ((size_t)64 << 20)  /* points file (CSV): 64 MiB */
#define FILEIO_CAP_RUNLOG ((size_t)512 << 20) /* run log (CSV): 512 MiB */

/* A whole file in memory. */
typedef struct {
    char *data;              /* len bytes and a terminating NUL; release with free() */
    size_t len;              /* bytes read */
    char sha256[SHA256_HEX]; /* lowercase hex SHA-256 of the len bytes */
} fileio_data;

/* Reads path (at most cap bytes) into out and hashes it. kind names the file in
 * messages ("column file"). "-" reads stdin when allow_stdin, else it is a file name.
 * Returns STAGECAL_OK; ENOINPUT (cannot open or read, not a regular file), EDATA (over
 * the limit) or ENOMEM, with out->data NULL. */
int read_all(const char *path, size_t cap, const char *kind, int allow_stdin, fileio_data *out,
             stagecal_error *err);

/* Opens path for reading with the checks of read_all (no stdin: the caller handles
 * "-"): *out is the stream (caller fcloses), or NULL with the status of read_all. The
 * size is checked when the file is opened; the caller's parser reads as it goes. */
int open_bounded(const char *path, size_t cap, const char *kind, FILE **out, stagecal_error *err);

/* Is out the same file as one of the n inputs (device and inode, whatever the name:
 * another spelling, a symbolic or a hard link)? Returns the index of that input, or
 * (size_t)-1. NULL or "-" names and files that do not exist are never the same. */
size_t output_is_input(const char *out, const char *const *inputs, size_t n);

/* An output being written. Zero it with atomic_init before use. */
typedef struct {
    int fd;          /* descriptor of the temporary file (read-write), -1 when closed */
    FILE *fp;        /* stream over fd (atomic_stream), NULL when not asked for */
    char *tmp;       /* its name in the target folder; NULL for an unnamed (O_TMPFILE) file */
    char *dir;       /* the target folder */
    char self[40];   /* "/proc/self/fd/N" for an unnamed file, else "" */
    int direct;      /* the target is a device or FIFO (/dev/null, /dev/stdout): fd is the
                        target itself, written in place (there is nothing to make atomic) */
    int failed;      /* a write failed: publishing is refused */
    int write_errno; /* errno of that failure */
    off_t written;   /* bytes written to fd so far */
    off_t wb_sent;   /* bytes [0, wb_sent) whose writeback has been started */
    int wb_off;      /* early writeback unavailable (unsupported call, a pipe): not tried */
} atomic_file;

/* Publishing modes. */
enum {
    ATOMIC_NEW = 0,    /* link(): the final name must not exist (never replaces) */
    ATOMIC_REPLACE = 1 /* rename(): replaces an existing file of that name */
};

void atomic_init(atomic_file *a);
/* Creates the temporary file in the folder of path (which must exist). EWRITE naming
 * path when the folder is missing or not writable, or path is a folder. When path
 * exists and is neither a regular file nor a folder (a device, a FIFO: /dev/null,
 * /dev/stdout), it is opened and written in place instead — never replaced. */
int atomic_open(atomic_file *a, const char *path, stagecal_error *err);
/* A name under which another library (PLplot) may open the temporary file. */
const char *atomic_path(const atomic_file *a);
/* A stdio stream over the temporary file (kept in a->fp); NULL with err set. On Linux
 * (glibc) the stream writes through a, so a must not move while the stream is open. */
FILE *atomic_stream(atomic_file *a, stagecal_error *err);
/* Appends n bytes; EWRITE naming path on failure (and every later publish fails). */
int atomic_write(atomic_file *a, const void *buf, size_t n, const char *path, stagecal_error *err);
/* Reads back what the file holds (for completeness checks): *out (caller frees, NUL
 * terminated) and *len. ENOMEM or EWRITE. */
int atomic_read_back(atomic_file *a, char **out, size_t *len, stagecal_error *err);
/* Completes the content: flush, error flag, mode 0644, fsync. Then gives it the name
 * path (mode ATOMIC_NEW or ATOMIC_REPLACE) and fsyncs the folder. With ATOMIC_NEW and
 * an existing path: EWRITE, and *exists = 1 when exists is not NULL (the temporary file
 * is kept, so the caller may try another name). On success the atomic_file is closed. */
int atomic_publish(atomic_file *a, const char *path, int mode, int *exists, stagecal_error *err);
/* Closes and removes the temporary file (ours) if it is still there. Safe to repeat. */
void atomic_discard(atomic_file *a);

/* Early writeback: once FILEIO_WB_CHUNK bytes more than a chunk lie behind the write
 * position, their writeback is started (Linux sync_file_range(SYNC_FILE_RANGE_WRITE):
 * queues the pages for the disk, does not wait for them); elsewhere nothing is done.
 * The published file is made durable by the fsync of atomic_publish either way. */
#define FILEIO_WB_CHUNK ((off_t)4 << 20)
/* 1 where this build starts writeback early (Linux with glibc), else 0. */
int fileio_early_writeback(void);
/* Test seam: the calls that start writeback of [off, off + len) and that make the
 * content durable (fsync); NULL members (or ops NULL) restore the system's. Not thread
 * safe; for tests only. */
typedef struct {
    int (*range)(int fd, off_t off, off_t len);
    int (*sync)(int fd);
} fileio_sync_ops;
void fileio_set_sync_ops(const fileio_sync_ops *ops);

/* write_all in one call: data[0..n) to path through an atomic_file. */
int write_atomic(const char *path, const void *data, size_t n, int mode, stagecal_error *err);

/* mkdir -p: creates dir and missing parents (mode 0777 less umask); EWRITE naming the
 * part that cannot be made. */
int make_dirs(const char *dir, stagecal_error *err);

#endif
