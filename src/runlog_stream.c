/*
 * runlog_stream.c — the files of a run log: the read loop, the checks made at a file's end,
 * the checksums of its bytes, and the stream that hands out one run at a time (see
 * stagecal/runlog.h; the cells and rows are runlog.c's).
 *
 * A file is read in chunks (runlog_read_chunk bytes, 64 KiB) and cut into physical lines
 * in the buffer; each line is fed to libcsv (or cut by plain_line) on its own, so the row
 * callback knows the line it ends on. Each chunk also goes through a 64-bit checksum (a file
 * given twice is refused by it) and, when the caller records provenance, SHA-256 (a fifth of
 * the reading time at 10^6 rows, so `invert` and `check` skip it). The stream stops reading
 * as soon as a second run has begun: the first is complete, and it is handed out by moving
 * the row arrays (not the rows) into the caller's log; the few rows of the next run are
 * copied back. Memory then holds one run, whatever the length of the log.
 */
#include <csv.h>
#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "fileio.h"
#include "internal.h"
#include "internal_sha256.h"
#include "runlog_internal.h"

/* A 64-bit checksum of bytes, eight at a time in four independent lanes (the multiply–rotate
 * round of common non-cryptographic hashes, common practice, no source; four lanes so that
 * the rounds of consecutive words do not wait on each other); equal files give equal sums,
 * however the file was cut into reads: bytes short of a whole 32-byte block wait in tail.
 * (The sum is compared with other files' sums, never written anywhere.) */
struct checksum {
    uint64_t h[4];
    unsigned char tail[32];
    size_t ntail;
};

static inline uint64_t checksum_round(uint64_t h, uint64_t w)
{
    h ^= w * 0x9E3779B97F4A7C15u;
    return ((h << 31) | (h >> 33)) * 0xC2B2AE3D27D4EB4Fu;
}

static void checksum_blocks(struct checksum *c, const unsigned char *b, size_t n)
{
    uint64_t h0 = c->h[0], h1 = c->h[1], h2 = c->h[2], h3 = c->h[3];
    for (size_t i = 0; i + 32 <= n; i += 32) {
        uint64_t w[4];
        memcpy(w, b + i, 32);
        h0 = checksum_round(h0, w[0]);
        h1 = checksum_round(h1, w[1]);
        h2 = checksum_round(h2, w[2]);
        h3 = checksum_round(h3, w[3]);
    }
    c->h[0] = h0, c->h[1] = h1, c->h[2] = h2, c->h[3] = h3;
}

static void checksum_update(struct checksum *c, const char *text, size_t n)
{
    const unsigned char *b = (const unsigned char *)text;
    if (c->ntail) {
        size_t k = n < 32 - c->ntail ? n : 32 - c->ntail;
        memcpy(c->tail + c->ntail, b, k);
        c->ntail += k;
        b += k;
        n -= k;
        if (c->ntail < 32)
            return;
        checksum_blocks(c, c->tail, 32);
        c->ntail = 0;
    }
    size_t whole = n & ~(size_t)31;
    checksum_blocks(c, b, whole);
    memcpy(c->tail, b + whole, n - whole);
    c->ntail = n - whole;
}

static uint64_t checksum_final(const struct checksum *c)
{
    uint64_t h = c->h[0];
    for (int k = 1; k < 4; k++)
        h = checksum_round(h, c->h[k]);
    for (size_t i = 0; i < c->ntail; i++)
        h = checksum_round(h, c->tail[i]);
    return h;
}

/* One file being read. */
struct file_read {
    struct reader *rd;
    FILE *in;
    int close_in; /* 1: in was opened here */
    struct csv_parser p;
    /* the bytes read: buf[pos, end) not yet taken as lines, then RL_READ_PAD zero bytes; cap
     * bytes of room before the pad (runlog_read_chunk, doubled while one line fills it) */
    char *buf;
    size_t cap, pos, end;
    int eof; /* no more bytes will come (end of file or a read error) */
    sha256_ctx hash;
    struct checksum sum;
    uint64_t nbytes;      /* bytes read */
    size_t errors_before; /* f->n_errors when the file began */
    /* A quoted cell may span lines (a notes column written by a spreadsheet); quote_line is
     * the line where the quoted cell still open at the end of the last line began, 0 when
     * none is open. libcsv's public 'quoted' member is set from a cell's opening quote
     * until the cell is submitted, and a line end outside quotes submits it. */
    long quote_line;
    int last_nl, parse_failed, read_failed, read_errno;
};

static int file_begin(struct file_read *fr, stagecal_runlog *log, FILE *in, const char *source,
                      const stagecal_column *col, const stagecal_runlog_params *params,
                      stagecal_findings *f, stagecal_error *err)
{
    memset(fr, 0, sizeof *fr);
    struct reader *rd = calloc(1, sizeof *rd);
    if (!rd)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    stagecal_error_clear(err);
    size_t nf = log->nfiles + 1;
    char(*files)[160] = realloc(log->files, nf * sizeof *files);
    if (files)
        log->files = files;
    char(*hashes)[65] = files ? realloc(log->sha256, nf * sizeof *hashes) : NULL;
    if (hashes)
        log->sha256 = hashes;
    uint64_t(*sums)[2] = hashes ? realloc(log->checksum, nf * sizeof *sums) : NULL;
    if (!sums || csv_init(&fr->p, CSV_APPEND_NULL) != 0) {
        free(rd);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    log->checksum = sums;
    snprintf(files[log->nfiles], sizeof files[0], "%s", source);
    hashes[log->nfiles][0] = '\0';
    sums[log->nfiles][0] = sums[log->nfiles][1] = 0;
    rd->file = log->nfiles++;
    rd->log = log;
    rd->col = col;
    rd->par = params ? *params : stagecal_runlog_default_params();
    rd->f = f;
    rd->err = err;
    rd->source = source;
    for (int i = 0; i < STAGECAL_RL_NCOL; i++) {
        rd->field_of[i] = -1;
        rd->val[i] = rd->raw[i] = NAN;
    }
    fr->rd = rd;
    fr->in = in;
    fr->errors_before = f ? f->n_errors : 0;
    fr->last_nl = 1;
    sha256_init(&fr->hash);
    return STAGECAL_OK;
}

/* A line read as libcsv reads it, without libcsv: when the parser is between rows and the
 * line ends in a line feed and holds no quote, carriage return, NUL, space or tab (other than
 * a tab separator) — the plain numeric rows of a historian's export — libcsv (default
 * options with CSV_APPEND_NULL) would hand over exactly the separator-delimited pieces, each
 * NUL-terminated, then end the row; reader_plain_line cuts them in place. Every other line
 * (quotes, trimmed spaces, CR LF endings, a row continued from the last line) goes to libcsv.
 * clean: the line's bytes before its last are plain, and its last is the line feed
 * (file_pump found it with plain_stop). Returns 1 when the line was read here. */
static int plain_line(struct file_read *fr, char *s, size_t len, int clean)
{
    if (!clean || fr->p.pstate != 0 || fr->p.entry_pos != 0 || len < 2)
        return 0; /* (pstate 0: libcsv's ROW_NOT_BEGUN) */
    reader_plain_line(fr->rd, s, len - 1);
    return 1;
}

/* Whether plain_stop can look for a line with separator sep: not when the separator is a
 * byte that must stop it (NUL, the line feed). */
static int plain_stop_ok(unsigned char sep)
{
    return sep != '\0' && sep != '\n';
}

/* The first byte from s on that a plain line may not hold before its end: a byte below 0x21
 * other than the separator (the line feed, CR, NUL, space, tab) or '"'. Eight bytes at a time
 * with exact per-byte masks (common bit-twiddling practice, no source): below 0x21 when the
 * byte's high bit is clear and its low seven bits plus 0x5F do not reach 0x80; equal to a
 * byte c when the byte of w ^ c·ones is zero. The zero bytes after the bytes read (the pad)
 * stop it there at the latest (plain_stop_ok). */
static inline char *plain_stop(char *s, unsigned char sep)
{
#if defined(__GNUC__) && defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    const uint64_t ones = 0x0101010101010101u, low7 = 0x7F7F7F7F7F7F7F7Fu;
    const uint64_t quotes = ones * '"', seps = ones * sep;
    int sep_low = sep < 0x21;
    for (;; s += 8) {
        uint64_t w, x, m;
        memcpy(&w, s, 8);
        m = ~(((w & low7) + ones * 0x5F) | w) & ~low7; /* below 0x21 */
        if (sep_low) {
            x = w ^ seps;
            m &= ((x & low7) + low7) | x; /* not the separator */
        }
        x = w ^ quotes;
        m |= ~(((x & low7) + low7) | x | low7); /* '"' */
        if (m)
            return s + ((unsigned)__builtin_ctzll(m) >> 3);
    }
#else
    for (;; s++)
        if (((unsigned char)*s <= ' ' && (unsigned char)*s != sep) || *s == '"')
            return s;
#endif
}

/* plain_stop within a line of len bytes, a byte at a time (the header line, whose separator
 * is known only once it is read, and separators plain_stop cannot take); s + len when none. */
static const char *plain_stop_bytes(const char *s, size_t len, unsigned char sep)
{
    for (size_t i = 0; i < len; i++) {
        unsigned char c = (unsigned char)s[i];
        if ((c <= ' ' && c != sep) || c == '"')
            return s + i;
    }
    return s + len;
}

size_t runlog_read_chunk = (size_t)64 << 10;

/* Reads more of the file behind the bytes not yet taken (moved to the buffer's start), into
 * a buffer twice as large when one line fills it, and hashes what came. 1 when bytes came,
 * 0 when none will (the end, a read error: read_errno, or no memory: rd->oom). */
static int file_fill(struct file_read *fr)
{
    if (fr->eof)
        return 0;
    size_t keep = fr->end - fr->pos;
    if (fr->pos) {
        memmove(fr->buf, fr->buf + fr->pos, keep);
        fr->pos = 0;
        fr->end = keep;
    }
    if (keep == fr->cap) {
        size_t cap = fr->cap ? 2 * fr->cap : runlog_read_chunk ? runlog_read_chunk : 1;
        char *buf = cap > fr->cap ? realloc(fr->buf, cap + RL_READ_PAD) : NULL;
        if (!buf) {
            fr->rd->oom = 1;
            return 0;
        }
        fr->buf = buf;
        fr->cap = cap;
    }
    size_t want = fr->cap - keep, got = fread(fr->buf + keep, 1, want, fr->in);
    if (got < want) {
        fr->eof = 1;
        fr->read_errno = ferror(fr->in) ? errno : 0;
    }
    if (fr->rd->par.sha256)
        sha256_update(&fr->hash, fr->buf + keep, got);
    checksum_update(&fr->sum, fr->buf + keep, got);
    fr->nbytes += got;
    fr->end = keep + got;
    memset(fr->buf + fr->end, 0, RL_READ_PAD);
    return got > 0;
}

/* Reads lines to the end of the file or, with stop, until the log holds a complete run (a
 * second one has begun). Lines are cut from the buffer as getline would cut them (at each
 * line feed; the last one may lack it; NUL bytes are bytes). Returns 1 at the end (or a
 * failure), 0 when stopped. */
static int file_pump(struct file_read *fr, int stop)
{
    struct reader *rd = fr->rd;
    while (!rd->oom) {
        if (stop && rd->log->nruns >= 2)
            return 0;
        unsigned char sep = (unsigned char)rd->sep;
        char *s = NULL, *nl = NULL; /* (buf is NULL before the first read) */
        int clean = -1;             /* -1: not known yet */
        if (fr->end > fr->pos) {
            s = fr->buf + fr->pos;
            char *e = fr->buf + fr->end;
            if (rd->line > 0 && plain_stop_ok(sep)) {
                /* the line's end found by the plain line's test: most lines are plain */
                char *q = plain_stop(s, sep);
                clean = q < e && *q == '\n';
                nl = clean ? q : q < e ? memchr(q, '\n', (size_t)(e - q)) : NULL;
            } else {
                nl = memchr(s, '\n', (size_t)(e - s));
            }
        }
        size_t len;
        if (nl) {
            len = (size_t)(nl - s) + 1;
        } else {
            if (file_fill(fr))
                continue;
            if (rd->oom || fr->end == fr->pos)
                break;
            s = fr->buf + fr->pos; /* the last line, without a line feed */
            len = fr->end - fr->pos;
            clean = 0;
        }
        fr->pos += len;
        if (rd->line++ == 0) {
            rd->sep = runlog_detect_separator(s, len, rd->par.csv_separator);
            rd->decimal_comma = rd->sep != ',';
            csv_set_delim(&fr->p, (unsigned char)rd->sep);
        }
        if (clean < 0)
            clean = s[len - 1] == '\n' &&
                    plain_stop_bytes(s, len - 1, (unsigned char)rd->sep) == s + len - 1;
        fr->last_nl = s[len - 1] == '\n';
        if (!plain_line(fr, s, len, clean) &&
            csv_parse(&fr->p, s, len, reader_on_field, reader_on_row, rd) != len) {
            reader_finding(rd, STAGECAL_FINDING_ERROR, rd->line, NULL, "%s",
                           csv_strerror(csv_error(&fr->p)));
            fr->parse_failed = 1;
            break;
        }
        if (!fr->p.quoted)
            fr->quote_line = 0;
        else if (fr->last_nl && fr->quote_line == 0)
            fr->quote_line = rd->line;
    }
    fr->read_failed = ferror(fr->in);
    return 1;
}

/* The end of the file: the last row, the file-level findings; frees the reader and closes
 * the file when it was opened here. The status of stagecal_runlog_read. */
static int file_end(struct file_read *fr, stagecal_runlog *log, stagecal_error *err)
{
    struct reader *rd = fr->rd;
    struct csv_parser *p = &fr->p;
    int ok = !fr->read_failed && !fr->parse_failed && !rd->oom;
    /* A last line without a line end: end it, so that 'quoted' again means "still open". */
    if (ok && !fr->last_nl && csv_parse(p, "\n", 1, reader_on_field, reader_on_row, rd) == 1 &&
        p->quoted && fr->quote_line == 0)
        fr->quote_line = rd->line;
    if (ok && p->quoted) {
        reader_fatal(rd, fr->quote_line, NULL,
                     "unterminated quoted field (the '\"' opened on this line is never closed)");
        csv_fini(p, NULL, NULL, NULL); /* drop the open cell: it holds the rest of the file */
    } else {
        csv_fini(p, reader_on_field, reader_on_row, rd);
    }
    csv_free(p);
    free(fr->buf);
    if (fr->close_in)
        fclose(fr->in);
    size_t me = rd->file;
    if (rd->par.sha256) {
        unsigned char digest[SHA256_DIGEST];
        sha256_final(&fr->hash, digest);
        sha256_to_hex(digest, log->sha256[me]);
    }
    log->checksum[me][0] = fr->nbytes;
    log->checksum[me][1] = checksum_final(&fr->sum);
    int rc = STAGECAL_OK;
    if (rd->oom) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
    } else if (fr->read_failed) {
        rc = error_set_at(err, STAGECAL_ENOINPUT, rd->source, 0, 0, "cannot read: %s",
                          strerror(fr->read_errno));
    } else if (!rd->header_done) {
        if (!rd->fatal) /* (an unterminated quote in the header has said why already) */
            reader_fatal(rd, 0, NULL, "no header row (expected time, W, xD, xB, R columns)");
        rc = STAGECAL_EDATA;
    } else if (rd->fatal) {
        rc = STAGECAL_EDATA;
    } else {
        reader_close_run(rd);
        if (rd->file_rows == 0)
            reader_finding(rd, STAGECAL_FINDING_ERROR, 0, NULL, "no data rows");
        else if (rd->complete_rows == 0 && rd->f && rd->f->n_errors == fr->errors_before)
            /* (when cells were refused, their errors already say why no row is complete) */
            reader_finding(rd, STAGECAL_FINDING_ERROR, 0, NULL,
                           "no row has time, W, xD, xB and R all present (expected at least %zu "
                           "such rows per run)",
                           rd->par.min_rows);
        /* The same bytes twice would count the same runs twice as independent evidence. */
        for (size_t k = 0; k < me; k++) {
            if (log->checksum[k][0] != log->checksum[me][0] ||
                log->checksum[k][1] != log->checksum[me][1])
                continue;
            if (log->sha256[k][0] && log->sha256[me][0])
                reader_finding(rd, STAGECAL_FINDING_ERROR, 0, NULL,
                               "same content as '%s' (SHA-256 %.12s…): each log may be given "
                               "once",
                               log->files[k], log->sha256[k]);
            else
                reader_finding(rd, STAGECAL_FINDING_ERROR, 0, NULL,
                               "same content as '%s' (%" PRIu64
                               " bytes, same checksum): each log may be given once",
                               log->files[k], fr->nbytes);
            break;
        }
        reader_disagree_warning(rd);
        for (int i = 0; i < STAGECAL_RL_NCOL; i++)
            if (rd->nmissing[i] && rd->field_of[i] >= 0) {
                const char *h = rd->hdr[rd->field_of[i]];
                reader_finding(rd, STAGECAL_FINDING_WARNING, 0, h,
                               "column '%s': %zu missing values (first at line %ld)", h,
                               rd->nmissing[i], rd->first_missing[i]);
            }
    }
    free(rd->names);
    free(rd->w_raw);
    stagecal_physics_free(rd->ph_own);
    free(rd);
    fr->rd = NULL;
    return rc;
}

int stagecal_runlog_read_stream(stagecal_runlog *log, FILE *in, const char *source,
                                const stagecal_column *col, const stagecal_runlog_params *params,
                                stagecal_findings *f, stagecal_error *err)
{
    struct file_read fr;
    int rc = file_begin(&fr, log, in, source, col, params, f, err);
    if (rc != STAGECAL_OK)
        return rc;
    file_pump(&fr, 0);
    return file_end(&fr, log, err);
}

/* Opens path ("-" = stdin) for reading; a file over the size limit is a finding, as bad
 * content is. */
static int open_log(const char *path, FILE **in, stagecal_findings *f, stagecal_error *err)
{
    if (strcmp(path, "-") == 0) {
        *in = stdin;
        return STAGECAL_OK;
    }
    stagecal_error oerr;
    int rc = open_bounded(path, FILEIO_CAP_RUNLOG, "run log", in, &oerr);
    if (rc == STAGECAL_EDATA) {
        struct reader rd0;
        size_t skip = strlen(path) + 2; /* the message without its "path: " */
        memset(&rd0, 0, sizeof rd0);
        rd0.f = f;
        rd0.err = err;
        rd0.source = path;
        reader_fatal(&rd0, 0, NULL, "%s", strlen(oerr.text) > skip ? oerr.text + skip : oerr.text);
    } else if (rc != STAGECAL_OK && err) {
        *err = oerr;
    }
    return rc;
}

int stagecal_runlog_read(stagecal_runlog *log, const char *path, const stagecal_column *col,
                         const stagecal_runlog_params *params, stagecal_findings *f,
                         stagecal_error *err)
{
    FILE *in;
    int rc = open_log(path, &in, f, err);
    if (rc != STAGECAL_OK)
        return rc;
    rc = stagecal_runlog_read_stream(log, in, path, col, params, f, err);
    if (in != stdin)
        fclose(in);
    return rc;
}

int stagecal_runlog_read_buffer(stagecal_runlog *log, const char *text, size_t len,
                                const char *source, const stagecal_column *col,
                                const stagecal_runlog_params *params, stagecal_findings *f,
                                stagecal_error *err)
{
    if (len == 0) { /* fmemopen rejects a zero size */
        struct reader rd0;
        memset(&rd0, 0, sizeof rd0);
        rd0.f = f;
        rd0.err = err;
        rd0.source = source;
        reader_fatal(&rd0, 0, NULL, "no header row (expected time, W, xD, xB, R columns)");
        return STAGECAL_EDATA;
    }
    FILE *in = fmemopen((void *)(uintptr_t)text, len, "r");
    if (!in)
        return error_set(err, STAGECAL_ENOMEM, "cannot open memory stream");
    int rc = stagecal_runlog_read_stream(log, in, source, col, params, f, err);
    fclose(in);
    return rc;
}

/* ---- the stream -------------------------------------------------------------------- */

struct stagecal_runlog_stream {
    const char *const *paths;
    size_t npaths, next; /* files given, index of the next to open */
    const stagecal_column *col;
    stagecal_runlog_params par;
    stagecal_findings *f;
    stagecal_runlog *log;       /* rows read and not yet handed out */
    struct file_read fr;        /* the file being read */
    int open;                   /* 1: fr is reading a file */
    stagecal_physics *soft_own; /* the soft sensor's models, shared by the files (par) */
};

stagecal_runlog_soft stagecal_runlog_stream_soft(const stagecal_runlog_stream *s)
{
    stagecal_runlog_soft none = {0};
    return s && s->log ? s->log->soft : none;
}

stagecal_runlog_stream *stagecal_runlog_stream_alloc(const char *const *paths, size_t npaths,
                                                     const stagecal_column *col,
                                                     const stagecal_runlog_params *params,
                                                     stagecal_findings *f)
{
    stagecal_runlog_stream *s = calloc(1, sizeof *s);
    if (!s || !(s->log = stagecal_runlog_alloc())) {
        free(s);
        return NULL;
    }
    s->paths = paths;
    s->npaths = npaths;
    s->col = col;
    s->par = params ? *params : stagecal_runlog_default_params();
    s->soft_own = runlog_soft_share(col, &s->par);
    s->f = f;
    return s;
}

void stagecal_runlog_stream_free(stagecal_runlog_stream *s)
{
    if (!s)
        return;
    if (s->open) {
        csv_free(&s->fr.p);
        free(s->fr.buf);
        if (s->fr.close_in)
            fclose(s->fr.in);
        free(s->fr.rd->names);
        free(s->fr.rd->w_raw);
        stagecal_physics_free(s->fr.rd->ph_own);
        free(s->fr.rd);
    }
    stagecal_physics_free(s->soft_own);
    stagecal_runlog_free(s->log);
    free(s);
}

/* Gives dst the files of src (names, hashes, checksums). -1 on allocation failure. */
static int copy_files(stagecal_runlog *dst, const stagecal_runlog *src)
{
    size_t n = src->nfiles ? src->nfiles : 1;
    char(*files)[160] = realloc(dst->files, n * sizeof *files);
    if (files)
        dst->files = files;
    char(*hashes)[65] = files ? realloc(dst->sha256, n * sizeof *hashes) : NULL;
    if (hashes)
        dst->sha256 = hashes;
    uint64_t(*sums)[2] = hashes ? realloc(dst->checksum, n * sizeof *sums) : NULL;
    if (!sums)
        return -1;
    dst->checksum = sums;
    if (src->nfiles) {
        memcpy(files, src->files, src->nfiles * sizeof *files);
        memcpy(hashes, src->sha256, src->nfiles * sizeof *hashes);
        memcpy(sums, src->checksum, src->nfiles * sizeof *sums);
    }
    dst->nfiles = src->nfiles;
    dst->nfiles_iso = src->nfiles_iso;
    return 0;
}

/* The row arrays of a log, in one list (the first five are required signals). */
#define ROW_DOUBLES(l)                                                                             \
    {                                                                                              \
        &(l)->t_s, &(l)->w_mol, &(l)->xd, &(l)->xb, &(l)->r, &(l)->v_mol_s, &(l)->p_pa,            \
            &(l)->t_top_k, &(l)->t_pot_k, &(l)->t_reflux_k, &(l)->r_set, &(l)->u_r_set,            \
            &(l)->u_xd_inf, &(l)->u_xb_inf                                                         \
    }
#define N_ROW_DOUBLES 14

static void swap_storage(stagecal_runlog *a, stagecal_runlog *b)
{
    double **da[] = ROW_DOUBLES(a), **db[] = ROW_DOUBLES(b);
    for (size_t i = 0; i < N_ROW_DOUBLES; i++) {
        double *t = *da[i];
        *da[i] = *db[i];
        *db[i] = t;
    }
#define SWAP(T, m)                                                                                 \
    do {                                                                                           \
        T t_ = a->m;                                                                               \
        a->m = b->m;                                                                               \
        b->m = t_;                                                                                 \
    } while (0)
    SWAP(unsigned char *, xd_cens);
    SWAP(unsigned char *, xb_cens);
    SWAP(uint32_t *, line);
    SWAP(uint32_t *, run);
    SWAP(size_t, cap);
#undef SWAP
}

/* Moves the stream's first run (complete) into out: out takes the row arrays that hold it,
 * the stream takes out's old arrays (with the optional signals out has) and a copy of the
 * rows after the run (the next run's first rows, usually one). */
static int take_first_run(stagecal_runlog_stream *s, stagecal_runlog *out, stagecal_error *err)
{
    stagecal_runlog *log = s->log;
    size_t n0 = log->runs[0].n, tail = log->n - n0;
    swap_storage(log, out);
    double **dl[] = ROW_DOUBLES(log), **dout[] = ROW_DOUBLES(out);
    for (size_t i = 5; i < N_ROW_DOUBLES; i++)
        if (!*dout[i] && *dl[i]) {
            free(*dl[i]);
            *dl[i] = NULL;
        }
    log->n = 0;
    int fail = 0;
    for (size_t i = 5; i < N_ROW_DOUBLES && !fail; i++)
        if (*dout[i])
            fail = runlog_ensure_optional(log, dl[i]);
    while (!fail && (log->cap < tail || !log->t_s))
        fail = runlog_grow_rows(log);
    stagecal_runlog_run *runs = fail ? NULL : realloc(out->runs, sizeof *runs);
    if (!runs || copy_files(out, log) != 0)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    out->runs = runs;
    runs[0] = log->runs[0];
    out->nruns = 1;
    out->n = n0;
    for (size_t i = 0; i < N_ROW_DOUBLES; i++)
        if (*dout[i])
            memcpy(*dl[i], *dout[i] + n0, tail * sizeof(double));
    memcpy(log->xd_cens, out->xd_cens + n0, tail);
    memcpy(log->xb_cens, out->xb_cens + n0, tail);
    memcpy(log->line, out->line + n0, tail * sizeof *log->line);
    for (size_t j = 0; j < tail; j++)
        log->run[j] = out->run[n0 + j] - 1;
    log->n = tail;
    memmove(log->runs, log->runs + 1, (log->nruns - 1) * sizeof *log->runs);
    log->nruns--;
    for (size_t k = 0; k < log->nruns; k++)
        log->runs[k].first -= n0;
    if (s->open && s->fr.rd->have_run)
        s->fr.rd->cur_run--;
    return STAGECAL_OK;
}

/* No rows in out (the end, or a file that could not be read); the files stay. */
static int hand_nothing(stagecal_runlog_stream *s, stagecal_runlog *out, int rc)
{
    out->n = 0;
    out->nruns = 0;
    if (copy_files(out, s->log) != 0 && rc == STAGECAL_OK)
        rc = STAGECAL_ENOMEM;
    return rc;
}

int stagecal_runlog_stream_next(stagecal_runlog_stream *s, stagecal_runlog *run,
                                stagecal_error *err)
{
    for (;;) {
        if (s->log->nruns >= 2 || (!s->open && s->log->nruns == 1))
            return take_first_run(s, run, err);
        if (s->open) {
            if (file_pump(&s->fr, 1) == 0)
                continue;
            s->open = 0;
            int rc = file_end(&s->fr, s->log, err);
            if (rc != STAGECAL_OK)
                return hand_nothing(s, run, rc);
            continue;
        }
        if (s->next >= s->npaths)
            return hand_nothing(s, run, STAGECAL_OK);
        const char *path = s->paths[s->next++];
        FILE *in;
        int rc = open_log(path, &in, s->f, err);
        if (rc == STAGECAL_OK &&
            (rc = file_begin(&s->fr, s->log, in, path, s->col, &s->par, s->f, err)) !=
                STAGECAL_OK &&
            in != stdin)
            fclose(in);
        if (rc != STAGECAL_OK)
            return hand_nothing(s, run, rc);
        s->fr.close_in = in != stdin;
        s->open = 1;
    }
}
