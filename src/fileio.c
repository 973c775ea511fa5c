/*
 * fileio.c — bounded whole-file reading with one hash, and the atomic writer
 * (contracts in fileio.h).
 *
 * Workload: a command reads a handful of inputs (kilobytes to a few hundred MiB of run
 * log) and writes one to four outputs; nothing here is on a hot path, so every step is
 * checked and nothing is cached.
 *
 * Reading opens with O_NONBLOCK (a FIFO without a writer then opens at once instead of
 * hanging), refuses anything fstat does not call a regular file, and compares the size
 * with the limit before reading; the read itself still stops at the limit, for a file
 * that grows while it is read.
 *
 * Writing follows the order that makes a crash harmless: content into a temporary file
 * in the target's folder (so the final rename/link stays on one file system), fsync,
 * then the name (link: fails with EEXIST instead of replacing; rename: replaces in one
 * step), then fsync of the folder so the name itself survives a power cut. On Linux the
 * temporary file is unnamed (O_TMPFILE) and linked in through /proc/self/fd, so even a
 * kill -9 leaves nothing behind; elsewhere it is a mkstemp file ".stagecal-tmp-XXXXXX".
 *
 * Early writeback (Linux): the fsync of a large output (168 MB for 10^6 run-log rows) took
 * 0.075 s at the very end of `invert`, both cores idle, the disk writing what the page cache
 * had gathered. Now every write through the atomic_file (atomic_write, and the stream of
 * atomic_stream, a glibc fopencookie stream that writes through it) starts the writeback of
 * whole FILEIO_WB_CHUNK ranges once the write position is a chunk past them
 * (sync_file_range(SYNC_FILE_RANGE_WRITE): the pages are queued for the disk, nothing is
 * waited for; the chunk of lag keeps the page being appended to out of writeback), so the
 * disk writes while the computation goes on and the final fsync waits for the last chunks
 * and the metadata only. The call can block when the device's queue is full; for 10^6
 * run-log rows (23–39 calls) it took 13–24 ms in all, at most 5.6 ms for one, in the writing
 * thread while the other core computes (docs/performance.md). The fsync stays, so what is
 * durable when the name appears does not change; a failing sync_file_range only stops the
 * early writeback (the fsync reports real write errors). Elsewhere (no sync_file_range or
 * no fopencookie) the stream is fdopen's and nothing starts early.
 */
/* O_TMPFILE and linkat(AT_SYMLINK_FOLLOW) on /proc/self/fd are Linux features, optional. */
#define _GNU_SOURCE

#include "fileio.h"

#include <errno.h>
#include <fcntl.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <unistd.h>

#include "internal.h"

#if defined(__linux__) && defined(__GLIBC__) && defined(SYNC_FILE_RANGE_WRITE)
#define FILEIO_EARLY_WB 1
#else
#define FILEIO_EARLY_WB 0
#endif

/* Permissions of a published file (outputs are for sharing; umask applies to O_TMPFILE). */
static const mode_t FILEIO_MODE = 0644;
/* Read granule when the size is not known in advance (stdin). */
static const size_t FILEIO_CHUNK = 65536;
/* Names tried for the intermediate link of an unnamed file that replaces a target. */
static const unsigned FILEIO_NAME_TRIES = 100;

/* ---- reading ------------------------------------------------------------------------- */

static const char *file_type(mode_t m)
{
    if (S_ISCHR(m))
        return "a character device";
    if (S_ISBLK(m))
        return "a block device";
    if (S_ISFIFO(m))
        return "a FIFO or pipe";
    if (S_ISSOCK(m))
        return "a socket";
    return "not a regular file";
}

/* "a" or "an" before kind ("an events file"). */
static const char *article(const char *kind)
{
    return strchr("aeiou", kind[0]) && kind[0] ? "an" : "a";
}

/* "16 MiB" / "4096 bytes" */
static void size_text(char *buf, size_t cap, size_t n)
{
    if (n >= ((size_t)1 << 20) && n % ((size_t)1 << 20) == 0)
        snprintf(buf, cap, "%zu MiB", n >> 20);
    else
        snprintf(buf, cap, "%zu bytes", n);
}

/* have: the size when known ("2147483648 bytes: "), else "". */
static int too_large(const char *path, size_t cap, const char *kind, const char *have,
                     stagecal_error *err)
{
    char lim[40];
    size_text(lim, sizeof lim, cap);
    return error_set_at(err, STAGECAL_EDATA, path, 0, 0,
                        "%slarger than the %s limit for %s %s (see docs/bad-inputs.md)", have, lim,
                        article(kind), kind);
}

/* Opens path read-only and non-blocking, checks it is a regular file of at most cap
 * bytes, then makes it blocking. Returns the descriptor, or -1 with err set. */
static int open_checked(const char *path, size_t cap, const char *kind, int *code,
                        stagecal_error *err)
{
    struct stat st;
    *code = STAGECAL_ENOINPUT;
    if (!path || !path[0]) {
        error_set(err, STAGECAL_ENOINPUT, "the %s name is empty (expected a file name)", kind);
        return -1;
    }
    int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC | O_NOCTTY);
    if (fd < 0) {
        error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "cannot open: %s", strerror(errno));
        return -1;
    }
    if (fstat(fd, &st) != 0) {
        error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "cannot read: %s", strerror(errno));
        close(fd);
        return -1;
    }
    if (S_ISDIR(st.st_mode)) {
        error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "cannot read: %s", strerror(EISDIR));
        close(fd);
        return -1;
    }
    if (!S_ISREG(st.st_mode)) {
        error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "%s, not a regular file (expected %s %s)",
                     file_type(st.st_mode), article(kind), kind);
        close(fd);
        return -1;
    }
    if ((uintmax_t)st.st_size > (uintmax_t)cap) {
        char have[48];
        snprintf(have, sizeof have, "%jd bytes: ", (intmax_t)st.st_size);
        *code = too_large(path, cap, kind, have, err);
        close(fd);
        return -1;
    }
    int fl = fcntl(fd, F_GETFL);
    if (fl == -1 || fcntl(fd, F_SETFL, fl & ~O_NONBLOCK) == -1) {
        error_set_at(err, STAGECAL_ENOINPUT, path, 0, 0, "cannot read: %s", strerror(errno));
        close(fd);
        return -1;
    }
    return fd;
}

/* Reads fd to its end, at most cap bytes, hashing as it goes. hint: expected size. */
static int read_fd(int fd, const char *name, size_t cap, const char *kind, size_t hint,
                   fileio_data *out, stagecal_error *err)
{
    sha256_ctx h;
    unsigned char digest[SHA256_DIGEST];
    size_t alloc = (hint < cap ? hint : cap) + 1, len = 0;
    char *buf = malloc(alloc + 1);
    if (!buf)
        return error_set(err, STAGECAL_ENOMEM, "out of memory reading '%s'", name);
    sha256_init(&h);
    for (;;) {
        if (len == alloc) {
            if (len > cap)
                break; /* one byte over the limit is enough to know */
            size_t grow = alloc < FILEIO_CHUNK ? FILEIO_CHUNK : alloc;
            size_t next = alloc + grow > cap + 1 ? cap + 1 : alloc + grow;
            char *g = realloc(buf, next + 1);
            if (!g) {
                free(buf);
                return error_set(err, STAGECAL_ENOMEM, "out of memory reading '%s'", name);
            }
            buf = g;
            alloc = next;
        }
        ssize_t got = read(fd, buf + len, alloc - len);
        if (got < 0 && errno == EINTR)
            continue;
        if (got < 0) {
            int e = errno;
            free(buf);
            return error_set_at(err, STAGECAL_ENOINPUT, name, 0, 0, "cannot read: %s", strerror(e));
        }
        if (got == 0)
            break;
        sha256_update(&h, buf + len, (size_t)got);
        len += (size_t)got;
    }
    if (len > cap) {
        free(buf);
        return too_large(name, cap, kind, "", err);
    }
    buf[len] = '\0';
    sha256_final(&h, digest);
    sha256_to_hex(digest, out->sha256);
    out->data = buf;
    out->len = len;
    return STAGECAL_OK;
}

int read_all(const char *path, size_t cap, const char *kind, int allow_stdin, fileio_data *out,
             stagecal_error *err)
{
    memset(out, 0, sizeof *out);
    if (allow_stdin && path && strcmp(path, "-") == 0)
        return read_fd(STDIN_FILENO, "<stdin>", cap, kind, FILEIO_CHUNK, out, err);
    int code;
    int fd = open_checked(path, cap, kind, &code, err);
    if (fd < 0)
        return code;
    struct stat st;
    size_t hint = fstat(fd, &st) == 0 ? (size_t)st.st_size : FILEIO_CHUNK;
    int rc = read_fd(fd, path, cap, kind, hint, out, err);
    close(fd);
    return rc;
}

int open_bounded(const char *path, size_t cap, const char *kind, FILE **out, stagecal_error *err)
{
    int code;
    int fd = open_checked(path, cap, kind, &code, err);
    *out = NULL;
    if (fd < 0)
        return code;
    if (!(*out = fdopen(fd, "r"))) {
        close(fd);
        return error_set(err, STAGECAL_ENOMEM, "out of memory opening '%s'", path);
    }
    return STAGECAL_OK;
}

size_t output_is_input(const char *out, const char *const *inputs, size_t n)
{
    struct stat so, si;
    if (!out || strcmp(out, "-") == 0 || stat(out, &so) != 0)
        return (size_t)-1;
    for (size_t k = 0; k < n; k++)
        if (inputs[k] && strcmp(inputs[k], "-") != 0 && stat(inputs[k], &si) == 0 &&
            si.st_dev == so.st_dev && si.st_ino == so.st_ino)
            return k;
    return (size_t)-1;
}

/* ---- writing ------------------------------------------------------------------------- */

static int sys_range(int fd, off_t off, off_t len)
{
#if FILEIO_EARLY_WB
    return sync_file_range(fd, off, len, SYNC_FILE_RANGE_WRITE);
#else
    (void)fd, (void)off, (void)len;
    errno = ENOSYS;
    return -1;
#endif
}

static int sys_sync(int fd)
{
    return fsync(fd);
}

static fileio_sync_ops sync_ops = {sys_range, sys_sync};

void fileio_set_sync_ops(const fileio_sync_ops *ops)
{
    sync_ops.range = ops && ops->range ? ops->range : sys_range;
    sync_ops.sync = ops && ops->sync ? ops->sync : sys_sync;
}

int fileio_early_writeback(void)
{
    return FILEIO_EARLY_WB;
}

/* After n more bytes written: starts the writeback of the whole chunks that lie a chunk
 * behind the write position (file comment). */
static void early_writeback(atomic_file *a, size_t n)
{
    a->written += (off_t)n;
    if (!FILEIO_EARLY_WB || a->direct || a->wb_off || a->written - a->wb_sent < 2 * FILEIO_WB_CHUNK)
        return;
    off_t len = (a->written - a->wb_sent - FILEIO_WB_CHUNK) / FILEIO_WB_CHUNK * FILEIO_WB_CHUNK;
    if (sync_ops.range(a->fd, a->wb_sent, len) != 0)
        a->wb_off = 1; /* not supported here (EINVAL, ENOSYS, ESPIPE): the fsync does it all */
    else
        a->wb_sent += len;
}

/* Writes n bytes to a's descriptor; 0, or -1 with a->failed and a->write_errno set. */
static int write_fd(atomic_file *a, const char *p, size_t n)
{
    while (n > 0 && !a->failed) {
        ssize_t w = write(a->fd, p, n);
        if (w < 0 && errno == EINTR)
            continue;
        if (w < 0) {
            a->failed = 1;
            a->write_errno = errno;
            break;
        }
        p += w;
        n -= (size_t)w;
        early_writeback(a, (size_t)w);
    }
    return a->failed ? -1 : 0;
}

int make_dirs(const char *dir, stagecal_error *err)
{
    char *path = strdup(dir);
    if (!path)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    size_t n = strlen(path);
    while (n > 1 && path[n - 1] == '/')
        path[--n] = '\0';
    for (char *s = path + 1;; s++) {
        int last = (*s == '\0');
        if (*s != '/' && !last)
            continue;
        *s = '\0';
        struct stat st;
        if (mkdir(path, 0777) != 0 &&
            !(errno == EEXIST && stat(path, &st) == 0 && S_ISDIR(st.st_mode))) {
            int e = errno == EEXIST ? ENOTDIR : errno;
            int rc = error_set(err, STAGECAL_EWRITE, "cannot create directory '%s': %s", path,
                               strerror(e));
            free(path);
            return rc;
        }
        if (last)
            break;
        *s = '/';
    }
    free(path);
    return STAGECAL_OK;
}

/* fsync of a directory, so a new name survives a crash. Some file systems refuse fsync
 * on a directory (EINVAL); that is not a failure of ours. */
static int sync_dir(const char *dir)
{
    int fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (fd < 0)
        return -1;
    int rc = fsync(fd);
    int e = errno;
    close(fd);
    if (rc != 0 && e != EINVAL && e != ENOTSUP) {
        errno = e;
        return -1;
    }
    return 0;
}

void atomic_init(atomic_file *a)
{
    memset(a, 0, sizeof *a);
    a->fd = -1;
}

/* The folder part of path ("." when none); NULL when out of memory. */
static char *dir_of(const char *path)
{
    const char *slash = strrchr(path, '/');
    if (!slash)
        return strdup(".");
    if (slash == path)
        return strdup("/");
    size_t n = (size_t)(slash - path);
    char *d = malloc(n + 1);
    if (d) {
        memcpy(d, path, n);
        d[n] = '\0';
    }
    return d;
}

int atomic_open(atomic_file *a, const char *path, stagecal_error *err)
{
    atomic_init(a);
    if (!path || !path[0])
        return error_set(err, STAGECAL_EWRITE, "the output file name is empty");
    if (path[strlen(path) - 1] == '/')
        return error_set(err, STAGECAL_EWRITE, "cannot create '%s': %s", path, strerror(EISDIR));
    struct stat st;
    if (stat(path, &st) == 0 && S_ISDIR(st.st_mode))
        return error_set(err, STAGECAL_EWRITE, "cannot create '%s': %s", path, strerror(EISDIR));
    if (!(a->dir = dir_of(path)))
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    if (stat(path, &st) == 0 && !S_ISREG(st.st_mode)) {
        /* a device or FIFO: written in place; replacing it would destroy the node */
        a->fd = open(path, O_WRONLY | O_NOCTTY | O_CLOEXEC);
        if (a->fd < 0) {
            int e = errno;
            atomic_discard(a);
            return error_set(err, STAGECAL_EWRITE, "cannot create '%s': %s", path, strerror(e));
        }
        a->direct = 1;
        return STAGECAL_OK;
    }
#if defined(__linux__) && defined(O_TMPFILE)
    a->fd = open(a->dir, O_TMPFILE | O_RDWR | O_CLOEXEC, FILEIO_MODE);
    if (a->fd >= 0) {
        snprintf(a->self, sizeof a->self, "/proc/self/fd/%d", a->fd);
        if (access(a->self, F_OK) == 0)
            return STAGECAL_OK;
        close(a->fd); /* no /proc: the unnamed file could not be linked in */
        a->fd = -1;
        a->self[0] = '\0';
    }
#endif
    size_t n = strlen(a->dir) + 32;
    if (!(a->tmp = malloc(n))) {
        atomic_discard(a);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    snprintf(a->tmp, n, "%s/.stagecal-tmp-XXXXXX", a->dir);
    a->fd = mkstemp(a->tmp);
    if (a->fd < 0) {
        int e = errno;
        free(a->tmp);
        a->tmp = NULL;
        atomic_discard(a);
        return error_set(err, STAGECAL_EWRITE, "cannot create '%s': %s", path, strerror(e));
    }
    if (fchmod(a->fd, FILEIO_MODE) != 0) {
        int e = errno;
        atomic_discard(a);
        return error_set(err, STAGECAL_EWRITE, "cannot create '%s': %s", path, strerror(e));
    }
    return STAGECAL_OK;
}

const char *atomic_path(const atomic_file *a)
{
    return a->tmp ? a->tmp : a->self;
}

#if FILEIO_EARLY_WB
static ssize_t stream_write(void *cookie, const char *buf, size_t n)
{
    atomic_file *a = cookie;
    if (write_fd(a, buf, n) != 0) {
        errno = a->write_errno;
        return -1;
    }
    return (ssize_t)n;
}

static int stream_close(void *cookie)
{
    (void)cookie; /* the descriptor is a's, closed with it */
    return 0;
}
#endif

FILE *atomic_stream(atomic_file *a, stagecal_error *err)
{
    if (a->fp)
        return a->fp;
#if FILEIO_EARLY_WB
    cookie_io_functions_t io = {NULL, stream_write, NULL, stream_close};
    if (!(a->fp = fopencookie(a, "w", io))) {
        error_set(err, STAGECAL_ENOMEM, "cannot open a stream on a temporary file");
        return NULL;
    }
#else
    int d = dup(a->fd);
    if (d < 0 || !(a->fp = fdopen(d, "w"))) {
        if (d >= 0)
            close(d);
        error_set(err, STAGECAL_ENOMEM, "cannot open a stream on a temporary file");
        return NULL;
    }
#endif
    return a->fp;
}

int atomic_write(atomic_file *a, const void *buf, size_t n, const char *path, stagecal_error *err)
{
    if (write_fd(a, buf, n) != 0)
        return error_set(err, STAGECAL_EWRITE, "cannot write '%s': %s", path,
                         strerror(a->write_errno));
    return STAGECAL_OK;
}

int atomic_read_back(atomic_file *a, char **out, size_t *len, stagecal_error *err)
{
    struct stat st;
    *out = NULL;
    *len = 0;
    if (a->fp && fflush(a->fp) != 0)
        return error_set(err, STAGECAL_EWRITE, "cannot flush a temporary file: %s",
                         strerror(errno));
    if (fstat(a->fd, &st) != 0)
        return error_set(err, STAGECAL_EWRITE, "cannot read back a temporary file: %s",
                         strerror(errno));
    size_t n = (size_t)st.st_size, got = 0;
    char *buf = malloc(n + 1);
    if (!buf)
        return error_set(err, STAGECAL_ENOMEM, "out of memory reading back a temporary file");
    while (got < n) {
        ssize_t r = pread(a->fd, buf + got, n - got, (off_t)got);
        if (r < 0 && errno == EINTR)
            continue;
        if (r <= 0) {
            int e = r < 0 ? errno : EIO;
            free(buf);
            return error_set(err, STAGECAL_EWRITE, "cannot read back a temporary file: %s",
                             strerror(e));
        }
        got += (size_t)r;
    }
    buf[n] = '\0';
    *out = buf;
    *len = n;
    return STAGECAL_OK;
}

/* Finishes the content: stream flushed and closed, fsync. -1 with errno set. */
static int finish_content(atomic_file *a)
{
    if (a->fp) {
        int bad = fflush(a->fp) != 0 || ferror(a->fp);
        int e = errno;
        bad |= fclose(a->fp) != 0;
        a->fp = NULL;
        if (bad && !a->failed) {
            a->failed = 1;
            a->write_errno = e ? e : EIO;
        }
    }
    if (a->failed) {
        errno = a->write_errno;
        return -1;
    }
    return sync_ops.sync(a->fd);
}

/* Links the unnamed file in under a fresh name in its folder (for a rename). */
static int link_unnamed_fresh(atomic_file *a)
{
    size_t n = strlen(a->dir) + 48;
    if (!(a->tmp = malloc(n))) {
        errno = ENOMEM;
        return -1;
    }
    for (unsigned k = 0; k < FILEIO_NAME_TRIES; k++) {
        snprintf(a->tmp, n, "%s/.stagecal-tmp-%ld-%u-%d", a->dir, (long)getpid(), k, a->fd);
        if (linkat(AT_FDCWD, a->self, AT_FDCWD, a->tmp, AT_SYMLINK_FOLLOW) == 0)
            return 0;
        if (errno != EEXIST)
            break;
    }
    int e = errno;
    free(a->tmp);
    a->tmp = NULL;
    errno = e;
    return -1;
}

/* Gives the named temporary file the name path without replacing anything: link(), or,
 * where hard links are unsupported, an O_EXCL reservation + rename(). 1 when the name
 * is taken, 0 on success, -1 on another failure (errno set). */
static int claim_name(atomic_file *a, const char *path)
{
    if (link(a->tmp, path) == 0) {
        unlink(a->tmp);
        return 0;
    }
    if (errno == EEXIST)
        return 1;
    if (errno != EPERM && errno != ENOTSUP && errno != EOPNOTSUPP && errno != EMLINK &&
        errno != EXDEV && errno != ENOSYS)
        return -1;
    int fd = open(path, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, FILEIO_MODE);
    if (fd < 0)
        return errno == EEXIST ? 1 : -1;
    close(fd);
    if (rename(a->tmp, path) != 0) {
        int e = errno;
        unlink(path);
        errno = e;
        return -1;
    }
    return 0;
}

int atomic_publish(atomic_file *a, const char *path, int mode, int *exists, stagecal_error *err)
{
    if (exists)
        *exists = 0;
    if (a->fd < 0)
        return error_set(err, STAGECAL_EWRITE, "cannot write '%s': the file was not opened", path);
    if (finish_content(a) != 0 && !(a->direct && (errno == EINVAL || errno == EROFS))) {
        int e = errno; /* (fsync of a pipe or character device is EINVAL: nothing to sync) */
        return error_set(err, STAGECAL_EWRITE, "cannot write '%s': %s", path, strerror(e));
    }
    if (a->direct) {
        int rc = close(a->fd);
        int e = errno;
        a->fd = -1;
        atomic_discard(a);
        return rc == 0
                   ? STAGECAL_OK
                   : error_set(err, STAGECAL_EWRITE, "cannot write '%s': %s", path, strerror(e));
    }
    int rc;
    if (mode == ATOMIC_NEW) {
        if (a->tmp)
            rc = claim_name(a, path);
        else if (linkat(AT_FDCWD, a->self, AT_FDCWD, path, AT_SYMLINK_FOLLOW) == 0)
            rc = 0;
        else
            rc = errno == EEXIST ? 1 : -1;
        if (rc == 1) {
            if (exists)
                *exists = 1;
            return error_set(err, STAGECAL_EWRITE,
                             "cannot write '%s': the file exists (an "
                             "earlier output is never replaced)",
                             path);
        }
    } else {
        rc = a->tmp ? 0 : link_unnamed_fresh(a);
        if (rc == 0 && rename(a->tmp, path) != 0)
            rc = -1;
    }
    if (rc != 0) {
        int e = errno;
        return error_set(err, STAGECAL_EWRITE, "cannot write '%s': %s", path, strerror(e));
    }
    free(a->tmp); /* the temporary name is gone (linked and removed, or renamed) */
    a->tmp = NULL;
    close(a->fd);
    a->fd = -1;
    if (sync_dir(a->dir) != 0) {
        int e = errno;
        if (mode == ATOMIC_NEW)
            unlink(path); /* a name we created and cannot make durable */
        atomic_discard(a);
        return error_set(err, STAGECAL_EWRITE, "cannot sync the folder of '%s': %s", path,
                         strerror(e));
    }
    atomic_discard(a);
    return STAGECAL_OK;
}

void atomic_discard(atomic_file *a)
{
    if (a->fp)
        fclose(a->fp);
    if (a->fd >= 0)
        close(a->fd); /* an unnamed file vanishes with its last descriptor */
    if (a->tmp)
        unlink(a->tmp); /* only the name mkstemp (or we) created */
    free(a->tmp);
    free(a->dir);
    atomic_init(a);
}

int write_atomic(const char *path, const void *data, size_t n, int mode, stagecal_error *err)
{
    atomic_file a;
    int rc = atomic_open(&a, path, err);
    if (rc == STAGECAL_OK && (rc = atomic_write(&a, data, n, path, err)) == STAGECAL_OK)
        rc = atomic_publish(&a, path, mode, NULL, err);
    atomic_discard(&a);
    return rc;
}
