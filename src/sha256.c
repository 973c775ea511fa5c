/*
 * sha256.c — SHA-256 as specified in FIPS 180-4 (NIST, 2015), §4.1.2 (functions),
 * §4.2.2 (constants), §5.1.1 (padding), §5.3.3 (initial hash value) and §6.2.2
 * (hash computation). Byte-oriented input; big-endian word packing. On x86-64 with the
 * SHA extensions the blocks go through them (compress_ni).
 */
#include <string.h>

#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#define SHA256_X86 1
#include <cpuid.h>
#include <immintrin.h>
#else
#define SHA256_X86 0
#endif

/* after every system header: banned.h redefines libc names */
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

/* ---- the x86 SHA extensions ------------------------------------------------------------- */

#if SHA256_X86

/* The same compression with the SHA-NI instructions (sha256rnds2: two rounds on the state
 * held as ABEF/CDGH; sha256msg1/msg2: the message schedule's σ0 and σ1 parts; Intel,
 * "Intel SHA Extensions", 2013 — from memory), for nblocks consecutive blocks. The
 * same digests as compress() by definition of the instructions; checked against it on 2000
 * random runs of 1–37 blocks with random states (a scratch program, not kept), and by the
 * FIPS 180-4 vectors and hashlib comparisons of tests/test_model.c on any machine that has
 * the extensions (on one without them, and under valgrind, which does not report them,
 * those tests check compress()). */
__attribute__((target("sha,sse4.1,ssse3"))) static void
compress_ni(uint32_t h[8], const unsigned char *p, size_t nblocks)
{
    const __m128i swap = _mm_set_epi64x(0x0c0d0e0f08090a0bLL, 0x0405060700010203LL);
    __m128i t = _mm_loadu_si128((const __m128i *)(const void *)&h[0]);  /* A B C D */
    __m128i s1 = _mm_loadu_si128((const __m128i *)(const void *)&h[4]); /* E F G H */
    t = _mm_shuffle_epi32(t, 0xB1);
    s1 = _mm_shuffle_epi32(s1, 0x1B);
    __m128i s0 = _mm_alignr_epi8(t, s1, 8); /* A B E F, as sha256rnds2 takes them */
    s1 = _mm_blend_epi16(s1, t, 0xF0);      /* C D G H */
    for (; nblocks > 0; nblocks--, p += 64) {
        __m128i save0 = s0, save1 = s1, w[4];
        for (int g = 0; g < 16; g++) { /* rounds 4g .. 4g + 3 */
            __m128i cur;
            if (g < 4) {
                cur = _mm_loadu_si128((const __m128i *)(const void *)(p + 16 * g));
                cur = _mm_shuffle_epi8(cur, swap); /* big-endian words */
            } else { /* w[t] = w[t−16] + σ0(w[t−15]) + w[t−7] + σ1(w[t−2]) */
                cur = _mm_sha256msg1_epu32(w[g & 3], w[(g - 3) & 3]);
                cur = _mm_add_epi32(cur, _mm_alignr_epi8(w[(g - 1) & 3], w[(g - 2) & 3], 4));
                cur = _mm_sha256msg2_epu32(cur, w[(g - 1) & 3]);
            }
            w[g & 3] = cur;
            __m128i msg =
                _mm_add_epi32(cur, _mm_loadu_si128((const __m128i *)(const void *)&k256[4 * g]));
            s1 = _mm_sha256rnds2_epu32(s1, s0, msg);
            msg = _mm_shuffle_epi32(msg, 0x0E);
            s0 = _mm_sha256rnds2_epu32(s0, s1, msg);
        }
        s0 = _mm_add_epi32(s0, save0);
        s1 = _mm_add_epi32(s1, save1);
    }
    t = _mm_shuffle_epi32(s0, 0x1B);
    s1 = _mm_shuffle_epi32(s1, 0xB1);
    s0 = _mm_blend_epi16(t, s1, 0xF0); /* A B C D */
    s1 = _mm_alignr_epi8(s1, t, 8);    /* E F G H */
    _mm_storeu_si128((__m128i *)(void *)&h[0], s0);
    _mm_storeu_si128((__m128i *)(void *)&h[4], s1);
}

/* 1 when the CPU has the SHA extensions and SSSE3/SSE4.1 (CPUID leaves 1 and 7). */
static int have_sha_ni(void)
{
    unsigned a, b, c, d;
    if (!__get_cpuid(1, &a, &b, &c, &d) || !(c & (1u << 9)) || !(c & (1u << 19)))
        return 0;
    return __get_cpuid_count(7, 0, &a, &b, &c, &d) && (b & (1u << 29));
}

/* nblocks blocks through the extensions when there are, else compress(). */
static void compress_blocks(uint32_t h[8], const unsigned char *p, size_t nblocks)
{
    static _Atomic int hw = -1; /* -1: not asked yet */
    int use = hw;
    if (use < 0)
        hw = use = have_sha_ni();
    if (use) {
        compress_ni(h, p, nblocks);
        return;
    }
    for (; nblocks > 0; nblocks--, p += 64)
        compress(h, p);
}
#else
static void compress_blocks(uint32_t h[8], const unsigned char *p, size_t nblocks)
{
    for (; nblocks > 0; nblocks--, p += 64)
        compress(h, p);
}
#endif

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
        compress_blocks(c->h, c->buf, 1);
        c->nbuf = 0;
    }
    compress_blocks(c->h, p, len / 64);
    p += len / 64 * 64;
    len %= 64;
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
