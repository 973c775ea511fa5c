/*
 * sha256.c — SHA-256 as specified in FIPS 180-4 (NIST, 2015), §4.1.2 (functions),
 * §4.2.2 (constants), §5.1.1 (padding), §5.3.3 (initial hash value) and §6.2.2
 * (hash computation). Byte-oriented input; big-endian word packing.
 */
#include <string.h>

#include "internal.h"
#include "internal_sha256.h"

static const uint32_t k256[64] = {
    0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4, 0xab1c5ed5,
    0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe, 0x9bdc06a7, 0xc19bf174,
    0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f, 0x4a7484aa, 0x5cb0a9dc, 0x76f988da,
    0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7, 0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967,
    0x27b70a85, 0x2e1b2138, 0x4d2c6dfc, 0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85,
    0xa2bfe8a1, 0xa81a664b, 0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070,
    0x19a4c116, 0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
    0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7, 0xc67178f2};

static uint32_t rotr(uint32_t x, unsigned n)
{
    return (x >> n) | (x << (32u - n));
}

static void compress(uint32_t h[8], const unsigned char *p)
{
    uint32_t w[64];
    for (size_t t = 0; t < 16; t++)
        w[t] = (uint32_t)p[4 * t] << 24 | (uint32_t)p[4 * t + 1] << 16 |
               (uint32_t)p[4 * t + 2] << 8 | (uint32_t)p[4 * t + 3];
    for (size_t t = 16; t < 64; t++) {
        uint32_t s0 = rotr(w[t - 15], 7) ^ rotr(w[t - 15], 18) ^ (w[t - 15] >> 3);
        uint32_t s1 = rotr(w[t - 2], 17) ^ rotr(w[t - 2], 19) ^ (w[t - 2] >> 10);
        w[t] = w[t - 16] + s0 + w[t - 7] + s1;
    }
    uint32_t a = h[0], b = h[1], c = h[2], d = h[3], e = h[4], f = h[5], g = h[6], hh = h[7];
    for (size_t t = 0; t < 64; t++) {
        uint32_t s1 = rotr(e, 6) ^ rotr(e, 11) ^ rotr(e, 25);
        uint32_t ch = (e & f) ^ (~e & g);
        uint32_t t1 = hh + s1 + ch + k256[t] + w[t];
        uint32_t s0 = rotr(a, 2) ^ rotr(a, 13) ^ rotr(a, 22);
        uint32_t maj = (a & b) ^ (a & c) ^ (b & c);
        uint32_t t2 = s0 + maj;
        hh = g;
        g = f;
        f = e;
        e = d + t1;
        d = c;
        c = b;
        b = a;
        a = t1 + t2;
    }
    h[0] += a;
    h[1] += b;
    h[2] += c;
    h[3] += d;
    h[4] += e;
    h[5] += f;
    h[6] += g;
    h[7] += hh;
}

void sha256_init(sha256_ctx *c)
{
    static const uint32_t h0[8] = {0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a,
                                   0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19};
    memcpy(c->h, h0, sizeof h0);
    c->nbytes = 0;
    c->nbuf = 0;
}

void sha256_update(sha256_ctx *c, const void *data, size_t len)
{
    const unsigned char *p = data;
    c->nbytes += len;
    if (c->nbuf > 0) {
        size_t take = 64 - c->nbuf < len ? 64 - c->nbuf : len;
        memcpy(c->buf + c->nbuf, p, take);
        c->nbuf += take;
        p += take;
        len -= take;
        if (c->nbuf < 64)
            return;
        compress(c->h, c->buf);
        c->nbuf = 0;
    }
    for (; len >= 64; p += 64, len -= 64)
        compress(c->h, p);
    if (len > 0) {
        memcpy(c->buf, p, len);
        c->nbuf = len;
    }
}

void sha256_final(sha256_ctx *c, unsigned char out[SHA256_DIGEST])
{
    uint64_t bits = c->nbytes * 8u;
    unsigned char pad[72];
    /* 0x80, zeros up to 56 mod 64, then the 64-bit big-endian length (§5.1.1). */
    size_t npad = (c->nbuf < 56 ? 56 - c->nbuf : 120 - c->nbuf);
    memset(pad, 0, sizeof pad);
    pad[0] = 0x80;
    for (size_t i = 0; i < 8; i++)
        pad[npad + i] = (unsigned char)(bits >> (56 - 8 * i));
    uint64_t keep = c->nbytes;
    sha256_update(c, pad, npad + 8);
    c->nbytes = keep;
    for (size_t i = 0; i < 8; i++) {
        out[4 * i] = (unsigned char)(c->h[i] >> 24);
        out[4 * i + 1] = (unsigned char)(c->h[i] >> 16);
        out[4 * i + 2] = (unsigned char)(c->h[i] >> 8);
        out[4 * i + 3] = (unsigned char)c->h[i];
    }
}

void sha256_to_hex(const unsigned char digest[SHA256_DIGEST], char hex[SHA256_HEX])
{
    static const char digits[] = "0123456789abcdef";
    for (size_t i = 0; i < SHA256_DIGEST; i++) {
        hex[2 * i] = digits[digest[i] >> 4];
        hex[2 * i + 1] = digits[digest[i] & 0xf];
    }
    hex[2 * SHA256_DIGEST] = '\0';
}

void sha256_hex(const void *data, size_t len, char hex[SHA256_HEX])
{
    sha256_ctx c;
    unsigned char d[SHA256_DIGEST];
    sha256_init(&c);
    sha256_update(&c, data, len);
    sha256_final(&c, d);
    sha256_to_hex(d, hex);
}
