/*
 * internal_sha256.h — SHA-256 (FIPS 180-4, §6.2) for model-file checksums and the
 * provenance hashes of input files. None of the Debian libraries we depend on offers
 * a hash, so this small implementation is ours; tests/test_model.c checks it against
 * the FIPS 180-4 example vectors and against Python's hashlib.
 */
#ifndef STAGECAL_INTERNAL_SHA256_H
#define STAGECAL_INTERNAL_SHA256_H

#include <stddef.h>
#include <stdint.h>

#define SHA256_DIGEST 32 /* bytes in a digest */
#define SHA256_HEX 65    /* lowercase hex digest + NUL */

typedef struct {
    uint32_t h[8];         /* chaining state */
    uint64_t nbytes;       /* message length so far, bytes */
    unsigned char buf[64]; /* pending partial block */
    size_t nbuf;           /* bytes in buf, < 64 */
} sha256_ctx;

void sha256_init(sha256_ctx *c);
void sha256_update(sha256_ctx *c, const void *data, size_t len);
void sha256_final(sha256_ctx *c, unsigned char out[SHA256_DIGEST]);
/* One-shot digest of data[0..len) as lowercase hex in hex[SHA256_HEX]. */
void sha256_hex(const void *data, size_t len, char hex[SHA256_HEX]);
/* Lowercase hex of a finished digest. */
void sha256_to_hex(const unsigned char digest[SHA256_DIGEST], char hex[SHA256_HEX]);

#endif
