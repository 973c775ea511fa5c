/*
 * test_fileio.c — the one file reader and the one atomic writer (src/fileio.c).
 *
 * Sources of truth: the FIPS 180-4 example digest of "abc" (Appendix B.1 of the
 * standard) for the hash taken while reading; the file system itself (stat, readdir)
 * for what the writer leaves behind. Each refusal (directory, character device, FIFO,
 * sparse file over the limit, a full "disk" through RLIMIT_FSIZE) is provoked on
 * purpose. All files live in a fresh folder under the build tree.
 */
#define _GNU_SOURCE /* (mkdtemp, symlink, link in glibc with C11 strict) */
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <setjmp.h>
#include <signal.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>
#include <cmocka.h>

#include "fileio.h"

static char dir[512];

static int setup(void **state)
{
    (void)state;
    snprintf(dir, sizeof dir, "%s/fileio-XXXXXX", STAGECAL_BUILD_DIR);
    return mkdtemp(dir) ? 0 : -1;
}

static int teardown(void **state)
{
    (void)state;
    char cmd[600];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    return system(cmd) == 0 ? 0 : -1;
}

static void in_dir(char *buf, size_t cap, const char *name)
{
    snprintf(buf, cap, "%s/%s", dir, name);
}

static void spit(const char *path, const char *text)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(text, 1, strlen(text), f), strlen(text));
    assert_int_equal(fclose(f), 0);
}

static char *slurp(const char *path)
{
    static char buf[4096];
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = '\0';
    return buf;
}

/* Entries of dir besides . and .. */
static int count_entries(void)
{
    DIR *d = opendir(dir);
    int n = 0;
    struct dirent *e;
    assert_non_null(d);
    while ((e = readdir(d)))
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, ".."))
            n++;
    closedir(d);
    return n;
}

/* The bytes read are the bytes hashed: FIPS 180-4 B.1, SHA-256("abc"). */
static void fileio_read_all_hashes_what_it_read(void **state)
{
    (void)state;
    char path[600];
    fileio_data in;
    stagecal_error err;
    in_dir(path, sizeof path, "abc.txt");
    spit(path, "abc");
    assert_int_equal(read_all(path, 16, "test file", 0, &in, &err), STAGECAL_OK);
    assert_int_equal(in.len, 3);
    assert_string_equal(in.data, "abc");
    assert_string_equal(in.sha256,
                        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    free(in.data);
    /* exactly at the limit is accepted, one byte over is not */
    assert_int_equal(read_all(path, 3, "test file", 0, &in, &err), STAGECAL_OK);
    free(in.data);
    assert_int_equal(read_all(path, 2, "test file", 0, &in, &err), STAGECAL_EDATA);
    assert_null(in.data);
    assert_non_null(strstr(err.text, "3 bytes: larger than the 2 bytes limit for a test file"));
    /* an empty name is named as such */
    assert_int_equal(read_all("", 16, "column file", 0, &in, &err), STAGECAL_ENOINPUT);
    assert_string_equal(err.text, "the column file name is empty (expected a file name)");
    unlink(path);
}

/* A directory, a character device, a FIFO without a writer and a 2 GiB sparse file are
 * refused before a byte is read: the FIFO does not block, the sparse file is not read. */
static void fileio_refuses_what_is_not_a_bounded_file(void **state)
{
    (void)state;
    char fifo[600], sparse[600], want[800];
    fileio_data in;
    stagecal_error err;
    FILE *fp;
    in_dir(fifo, sizeof fifo, "fifo");
    in_dir(sparse, sizeof sparse, "sparse.csv");
    assert_int_equal(mkfifo(fifo, 0600), 0);
    int fd = open(sparse, O_WRONLY | O_CREAT, 0600);
    assert_true(fd >= 0);
    assert_int_equal(ftruncate(fd, (off_t)2 << 30), 0);
    close(fd);

    time_t t0 = time(NULL);
    assert_int_equal(read_all(dir, 1 << 20, "run log", 0, &in, &err), STAGECAL_ENOINPUT);
    snprintf(want, sizeof want, "%s: cannot read: Is a directory", dir);
    assert_string_equal(err.text, want);
    assert_int_equal(read_all("/dev/zero", 1 << 20, "run log", 0, &in, &err), STAGECAL_ENOINPUT);
    assert_string_equal(err.text,
                        "/dev/zero: a character device, not a regular file (expected a run log)");
    assert_int_equal(read_all(fifo, 1 << 20, "model file", 0, &in, &err), STAGECAL_ENOINPUT);
    assert_non_null(strstr(err.text, ": a FIFO or pipe, not a regular file (expected a model"));
    assert_int_equal(open_bounded(fifo, 1 << 20, "run log", &fp, &err), STAGECAL_ENOINPUT);
    assert_null(fp);
    assert_int_equal(read_all(sparse, (size_t)512 << 20, "run log", 0, &in, &err), STAGECAL_EDATA);
    snprintf(want, sizeof want,
             "%s: 2147483648 bytes: larger than the 512 MiB limit for a run log (see "
             "docs/bad-inputs.md)",
             sparse);
    assert_string_equal(err.text, want);
    assert_int_equal(open_bounded(sparse, (size_t)512 << 20, "run log", &fp, &err), STAGECAL_EDATA);
    /* none of this waited or read: far below the 2 s the issue allows (wall clock,
     * whole seconds; a FIFO that blocked would hang here, not just be slow) */
    assert_true(time(NULL) - t0 <= 2);
    unlink(fifo);
    unlink(sparse);
}

static void fileio_output_is_input_by_any_name(void **state)
{
    (void)state;
    char a[600], b[600], hard[600], soft[600], other[600], spelled[600];
    in_dir(a, sizeof a, "a.csv");
    in_dir(b, sizeof b, "b.csv");
    in_dir(hard, sizeof hard, "hard.csv");
    in_dir(soft, sizeof soft, "soft.csv");
    in_dir(other, sizeof other, "none.csv");
    in_dir(spelled, sizeof spelled, "./a.csv");
    spit(a, "1");
    spit(b, "1"); /* same content, another file: not the same input */
    assert_int_equal(link(a, hard), 0);
    assert_int_equal(symlink(a, soft), 0);
    const char *inputs[3] = {NULL, b, a};
    assert_int_equal(output_is_input(a, inputs, 3), 2);
    assert_int_equal(output_is_input(hard, inputs, 3), 2);
    assert_int_equal(output_is_input(soft, inputs, 3), 2);
    assert_int_equal(output_is_input(spelled, inputs, 3), 2);
    assert_int_equal(output_is_input(other, inputs, 3), (size_t)-1);
    assert_int_equal(output_is_input("-", inputs, 3), (size_t)-1);
    assert_int_equal(output_is_input(NULL, inputs, 3), (size_t)-1);
    unlink(a);
    unlink(b);
    unlink(hard);
    unlink(soft);
}

static void fileio_new_never_replaces_and_replace_does(void **state)
{
    (void)state;
    char path[600], nodir[600];
    stagecal_error err;
    atomic_file a;
    int exists = 0;
    in_dir(path, sizeof path, "out.txt");
    in_dir(nodir, sizeof nodir, "missing/out.txt");
    assert_int_equal(count_entries(), 0);
    assert_int_equal(write_atomic(path, "first\n", 6, ATOMIC_NEW, &err), STAGECAL_OK);
    assert_string_equal(slurp(path), "first\n");
    struct stat st;
    assert_int_equal(stat(path, &st), 0);
    mode_t mask = umask(022);
    umask(mask);
    /* 0644 less the umask (O_TMPFILE applies it); mkstemp's file is set to 0644 */
    assert_true((st.st_mode & 0777) == (0644 & ~mask) || (st.st_mode & 0777) == 0644);

    /* a second NEW under that name: refused, the first untouched, the content kept */
    assert_int_equal(atomic_open(&a, path, &err), STAGECAL_OK);
    assert_int_equal(atomic_write(&a, "second\n", 7, path, &err), STAGECAL_OK);
    assert_int_equal(atomic_publish(&a, path, ATOMIC_NEW, &exists, &err), STAGECAL_EWRITE);
    assert_int_equal(exists, 1);
    assert_string_equal(slurp(path), "first\n");
    atomic_discard(&a);
    assert_int_equal(count_entries(), 1); /* no temporary file left */

    assert_int_equal(write_atomic(path, "third\n", 6, ATOMIC_REPLACE, &err), STAGECAL_OK);
    assert_string_equal(slurp(path), "third\n");
    assert_int_equal(count_entries(), 1);

    /* the folder is missing: named, nothing created */
    assert_int_equal(write_atomic(nodir, "x", 1, ATOMIC_REPLACE, &err), STAGECAL_EWRITE);
    assert_non_null(strstr(err.text, "cannot create"));
    assert_int_equal(count_entries(), 1);
    /* a folder in the way of the name */
    assert_int_equal(write_atomic(dir, "x", 1, ATOMIC_REPLACE, &err), STAGECAL_EWRITE);
    /* a character device is written in place, never replaced by a file */
    assert_int_equal(write_atomic("/dev/null", "x", 1, ATOMIC_REPLACE, &err), STAGECAL_OK);
    assert_int_equal(stat("/dev/null", &st), 0);
    assert_true(S_ISCHR(st.st_mode));
    unlink(path);
}

/* A full "disk": RLIMIT_FSIZE below the content (SIGXFSZ ignored, so write() fails with
 * EFBIG as on a full file system with ENOSPC). The earlier file stays as it was and no
 * temporary file is left behind. */
static void fileio_full_disk_changes_nothing(void **state)
{
    (void)state;
    char path[600];
    static char big[65536];
    stagecal_error err;
    struct rlimit old, lim;
    in_dir(path, sizeof path, "full.txt");
    spit(path, "earlier\n");
    memset(big, 'x', sizeof big);
    assert_int_equal(getrlimit(RLIMIT_FSIZE, &old), 0);
    void (*prev)(int) = signal(SIGXFSZ, SIG_IGN);
    lim = old;
    lim.rlim_cur = 4096;
    assert_int_equal(setrlimit(RLIMIT_FSIZE, &lim), 0);
    int rc = write_atomic(path, big, sizeof big, ATOMIC_REPLACE, &err);
    assert_int_equal(setrlimit(RLIMIT_FSIZE, &old), 0);
    signal(SIGXFSZ, prev);
    assert_int_equal(rc, STAGECAL_EWRITE);
    assert_non_null(strstr(err.text, "File too large"));
    assert_string_equal(slurp(path), "earlier\n");
    assert_int_equal(count_entries(), 1);
    unlink(path);
}

/* Read back for completeness checks, through a stream. */
static void fileio_stream_and_read_back(void **state)
{
    (void)state;
    char path[600], *back = NULL;
    size_t n = 0;
    stagecal_error err;
    atomic_file a;
    in_dir(path, sizeof path, "stream.csv");
    assert_int_equal(atomic_open(&a, path, &err), STAGECAL_OK);
    FILE *f = atomic_stream(&a, &err);
    assert_non_null(f);
    fprintf(f, "R,stages\n%d,%d\n", 3, 7);
    assert_int_equal(atomic_read_back(&a, &back, &n, &err), STAGECAL_OK);
    assert_int_equal(n, 13);
    assert_string_equal(back, "R,stages\n3,7\n");
    free(back);
    assert_int_equal(count_entries(), 0 + (a.tmp != NULL)); /* unnamed on Linux */
    atomic_discard(&a);
    assert_int_equal(count_entries(), 0);
}

/* Early writeback (src/fileio.c): the calls the writer makes, recorded through the test
 * seam, each passed on to the system. Rules checked (from the contract in fileio.h, no
 * outside source): the ranges start at 0, follow each other without gap or overlap, are
 * whole chunks, each lies a chunk behind the size written when it is started, and together
 * they cover all but the last two chunks; the content is fsync'ed once, after the last
 * byte and the last range; the published bytes are the bytes written. */
static struct {
    int nrange, nsync, fail_range;
    off_t next, size_at_sync;
    int range_after_sync, bad_range;
} wb;

static int rec_range(int fd, off_t off, off_t len)
{
    struct stat st;
    assert_int_equal(fstat(fd, &st), 0);
    if (wb.nsync)
        wb.range_after_sync = 1;
    if (off != wb.next || len <= 0 || len % FILEIO_WB_CHUNK != 0 ||
        off + len > st.st_size - FILEIO_WB_CHUNK)
        wb.bad_range = 1;
    wb.nrange++;
    if (wb.fail_range) {
        errno = EINVAL;
        return -1;
    }
    wb.next = off + len;
#ifdef SYNC_FILE_RANGE_WRITE
    return sync_file_range(fd, off, len, SYNC_FILE_RANGE_WRITE);
#else
    return 0;
#endif
}

static int rec_sync(int fd)
{
    struct stat st;
    assert_int_equal(fstat(fd, &st), 0);
    wb.nsync++;
    wb.size_at_sync = st.st_size;
    return fsync(fd);
}

/* Writes `total` bytes of a known pattern through a stream (or atomic_write) in blocks of
 * 65 536 + 17 bytes, publishes, and checks what was published. */
static void write_pattern(const char *path, size_t total, int use_stream)
{
    static char block[65553];
    stagecal_error err;
    atomic_file a;
    assert_int_equal(atomic_open(&a, path, &err), STAGECAL_OK);
    FILE *f = use_stream ? atomic_stream(&a, &err) : NULL;
    assert_true(!use_stream || f);
    for (size_t done = 0; done < total;) {
        size_t n = total - done < sizeof block ? total - done : sizeof block;
        for (size_t k = 0; k < n; k++)
            block[k] = (char)('a' + (done + k) % 23);
        if (f)
            assert_int_equal(fwrite(block, 1, n, f), n);
        else
            assert_int_equal(atomic_write(&a, block, n, path, &err), STAGECAL_OK);
        done += n;
    }
    assert_int_equal(atomic_publish(&a, path, ATOMIC_NEW, NULL, &err), STAGECAL_OK);
    atomic_discard(&a);
    FILE *in = fopen(path, "rb");
    assert_non_null(in);
    size_t got = 0, bad = 0;
    int c;
    while ((c = getc(in)) != EOF) {
        bad += c != 'a' + (int)(got % 23);
        got++;
    }
    fclose(in);
    assert_int_equal(got, total);
    assert_int_equal(bad, 0);
    unlink(path);
}

static void fileio_early_writeback_then_fsync(void **state)
{
    (void)state;
    char path[600];
    const size_t total = (size_t)(5 * FILEIO_WB_CHUNK) + 12345;
    fileio_sync_ops ops = {rec_range, rec_sync};
    in_dir(path, sizeof path, "wb.csv");
    fileio_set_sync_ops(&ops);
    for (int mode = 0; mode < 3; mode++) { /* stream, atomic_write, a refusing sync_file_range */
        memset(&wb, 0, sizeof wb);
        wb.fail_range = mode == 2;
        write_pattern(path, total, mode != 1);
        assert_int_equal(wb.nsync, 1);
        assert_int_equal(wb.size_at_sync, total);
        assert_false(wb.range_after_sync);
        assert_false(wb.bad_range);
        if (!fileio_early_writeback())
            assert_int_equal(wb.nrange, 0);
        else if (mode == 2)
            assert_int_equal(wb.nrange, 1); /* refused once: not tried again */
        else
            assert_true(wb.next >= (off_t)total - 2 * FILEIO_WB_CHUNK && wb.nrange >= 2);
    }
    /* a small file: nothing started early, still synced */
    memset(&wb, 0, sizeof wb);
    write_pattern(path, 1000, 1);
    assert_int_equal(wb.nrange, 0);
    assert_int_equal(wb.nsync, 1);
    fileio_set_sync_ops(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(fileio_read_all_hashes_what_it_read),
        cmocka_unit_test(fileio_refuses_what_is_not_a_bounded_file),
        cmocka_unit_test(fileio_output_is_input_by_any_name),
        cmocka_unit_test(fileio_new_never_replaces_and_replace_does),
        cmocka_unit_test(fileio_full_disk_changes_nothing),
        cmocka_unit_test(fileio_stream_and_read_back),
        cmocka_unit_test(fileio_early_writeback_then_fsync),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
