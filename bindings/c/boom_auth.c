/*
 * boom_auth.c - authenticated frames for the boom-advisory wire format: a small,
 * self-contained SHA-256 and HMAC-SHA256, and the "auth" map entry of
 * docs/interface.md section 7.1.
 *
 * References: FIPS 180-4, "Secure Hash Standard", sections 4.1.2, 4.2.2, 5.1.1, 6.2
 * (SHA-256); RFC 2104 (HMAC); RFC 4231 (HMAC-SHA256 test vectors, run by boom_vectors).
 *
 * C99, libc only; no allocation, no global state.
 *
 * ADVISORY AID ONLY: boom-advisory is not certified flight software.
 */
#include "boom_wire.h"

#include <string.h>

/* FIPS 180-4 section 4.2.2: the first 32 bits of the fractional parts of the cube roots
 * of the first 64 primes. */
static const uint32_t K256[64] = {
    0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4,
    0xab1c5ed5, 0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe,
    0x9bdc06a7, 0xc19bf174, 0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f,
    0x4a7484aa, 0x5cb0a9dc, 0x76f988da, 0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7,
    0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967, 0x27b70a85, 0x2e1b2138, 0x4d2c6dfc,
    0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85, 0xa2bfe8a1, 0xa81a664b,
    0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070, 0x19a4c116,
    0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
    0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7,
    0xc67178f2};

#define ROTR(x, n) (((x) >> (n)) | ((x) << (32 - (n))))

/* One 64-byte block (FIPS 180-4 section 6.2.2). */
static void sha256_block(uint32_t h[8], const uint8_t *p)
{
    uint32_t w[64], a, b, c, d, e, f, g, k, t1, t2;
    int i;
    for (i = 0; i < 16; i++)
        w[i] = ((uint32_t)p[4 * i] << 24) | ((uint32_t)p[4 * i + 1] << 16) |
               ((uint32_t)p[4 * i + 2] << 8) | (uint32_t)p[4 * i + 3];
    for (i = 16; i < 64; i++) {
        uint32_t s0 = ROTR(w[i - 15], 7) ^ ROTR(w[i - 15], 18) ^ (w[i - 15] >> 3);
        uint32_t s1 = ROTR(w[i - 2], 17) ^ ROTR(w[i - 2], 19) ^ (w[i - 2] >> 10);
        w[i] = w[i - 16] + s0 + w[i - 7] + s1;
    }
    a = h[0]; b = h[1]; c = h[2]; d = h[3]; e = h[4]; f = h[5]; g = h[6]; k = h[7];
    for (i = 0; i < 64; i++) {
        t1 = k + (ROTR(e, 6) ^ ROTR(e, 11) ^ ROTR(e, 25)) + ((e & f) ^ (~e & g)) + K256[i] +
             w[i];
        t2 = (ROTR(a, 2) ^ ROTR(a, 13) ^ ROTR(a, 22)) + ((a & b) ^ (a & c) ^ (b & c));
        k = g; g = f; f = e; e = d + t1; d = c; c = b; b = a; a = t1 + t2;
    }
    h[0] += a; h[1] += b; h[2] += c; h[3] += d; h[4] += e; h[5] += f; h[6] += g; h[7] += k;
}

void boom_sha256_init(boom_sha256_ctx *c)
{
    /* FIPS 180-4 section 5.3.3 */
    static const uint32_t h0[8] = {0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a,
                                   0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19};
    memcpy(c->h, h0, sizeof h0);
    c->bits = 0;
    c->used = 0;
}

void boom_sha256_update(boom_sha256_ctx *c, const uint8_t *data, size_t len)
{
    c->bits += (uint64_t)len * 8u;
    while (len > 0) {
        size_t take = 64 - c->used;
        if (take > len)
            take = len;
        memcpy(c->block + c->used, data, take);
        c->used += take;
        data += take;
        len -= take;
        if (c->used == 64) {
            sha256_block(c->h, c->block);
            c->used = 0;
        }
    }
}

void boom_sha256_final(boom_sha256_ctx *c, uint8_t out[32])
{
    uint64_t bits = c->bits; /* padding (section 5.1.1): 0x80, zeros, 64-bit length */
    int i;
    c->block[c->used++] = 0x80;
    if (c->used > 56) {
        memset(c->block + c->used, 0, 64 - c->used);
        sha256_block(c->h, c->block);
        c->used = 0;
    }
    memset(c->block + c->used, 0, 56 - c->used);
    for (i = 0; i < 8; i++)
        c->block[56 + i] = (uint8_t)(bits >> (56 - 8 * i));
    sha256_block(c->h, c->block);
    for (i = 0; i < 8; i++) {
        out[4 * i] = (uint8_t)(c->h[i] >> 24);
        out[4 * i + 1] = (uint8_t)(c->h[i] >> 16);
        out[4 * i + 2] = (uint8_t)(c->h[i] >> 8);
        out[4 * i + 3] = (uint8_t)c->h[i];
    }
}

void boom_sha256(const uint8_t *data, size_t len, uint8_t out[32])
{
    boom_sha256_ctx c;
    boom_sha256_init(&c);
    boom_sha256_update(&c, data, len);
    boom_sha256_final(&c, out);
}

/* RFC 2104 section 2: H(K ^ opad, H(K ^ ipad, text)), keys longer than the 64-byte
 * block hashed first. */
void boom_hmac_sha256(const uint8_t *key, size_t key_len, const uint8_t *msg, size_t len,
                      uint8_t out[32])
{
    uint8_t k[64], pad[64], inner[32];
    boom_sha256_ctx c;
    size_t i;
    memset(k, 0, sizeof k);
    if (key_len > 64)
        boom_sha256(key, key_len, k);
    else if (key_len > 0)
        memcpy(k, key, key_len);
    for (i = 0; i < 64; i++)
        pad[i] = (uint8_t)(k[i] ^ 0x36);
    boom_sha256_init(&c);
    boom_sha256_update(&c, pad, 64);
    boom_sha256_update(&c, msg, len);
    boom_sha256_final(&c, inner);
    for (i = 0; i < 64; i++)
        pad[i] = (uint8_t)(k[i] ^ 0x5c);
    boom_sha256_init(&c);
    boom_sha256_update(&c, pad, 64);
    boom_sha256_update(&c, inner, 32);
    boom_sha256_final(&c, out);
}

/* "auth" (fixstr 4) and a bin 8 header of 32 bytes: what precedes the tag. */
static const uint8_t TRAILER[7] = {0xa4, 'a', 'u', 't', 'h', 0xc4, BOOM_AUTH_TAG_LEN};

int boom_sign_frame(uint8_t *buf, size_t len, size_t cap, const uint8_t *key,
                    size_t key_len, size_t *out_len)
{
    size_t grow, n;
    if (buf == NULL || out_len == NULL || key == NULL || len < 1)
        return BOOM_E_ARG;
    if (buf[0] >= 0x80 && buf[0] <= 0x8e) {
        grow = 0;
    } else if (buf[0] == 0x8f) {
        grow = 2;
    } else if (buf[0] == 0xde && len >= 3 && !(buf[1] == 0xff && buf[2] == 0xff)) {
        grow = 0;
    } else {
        return BOOM_E_ARG;
    }
    n = len + grow + sizeof TRAILER + BOOM_AUTH_TAG_LEN;
    if (n > cap || n > BOOM_MAX_PAYLOAD)
        return BOOM_E_NO_ROOM;
    if (buf[0] == 0xde) {
        unsigned count = ((unsigned)buf[1] << 8 | buf[2]) + 1u;
        buf[1] = (uint8_t)(count >> 8);
        buf[2] = (uint8_t)count;
    } else if (grow) { /* fixmap 15 -> map 16 with 16 entries */
        memmove(buf + 3, buf + 1, len - 1);
        buf[0] = 0xde;
        buf[1] = 0x00;
        buf[2] = 0x10;
    } else {
        buf[0] = (uint8_t)(buf[0] + 1);
    }
    len += grow;
    memcpy(buf + len, TRAILER, sizeof TRAILER);
    len += sizeof TRAILER;
    boom_hmac_sha256(key, key_len, buf, len, buf + len);
    *out_len = len + BOOM_AUTH_TAG_LEN;
    return BOOM_OK;
}

int boom_check_auth(const uint8_t *payload, size_t len, const uint8_t *key,
                    size_t key_len)
{
    uint8_t good[BOOM_AUTH_TAG_LEN];
    uint8_t diff = 0;
    size_t i, body;
    if (payload == NULL || len < sizeof TRAILER + BOOM_AUTH_TAG_LEN + 1)
        return BOOM_AUTH_MISSING;
    body = len - BOOM_AUTH_TAG_LEN;
    if (memcmp(payload + body - sizeof TRAILER, TRAILER, sizeof TRAILER) != 0)
        return BOOM_AUTH_MISSING;
    boom_hmac_sha256(key, key_len, payload, body, good);
    for (i = 0; i < BOOM_AUTH_TAG_LEN; i++) /* constant time: no early exit */
        diff |= (uint8_t)(good[i] ^ payload[body + i]);
    return diff == 0 ? BOOM_AUTH_OK : BOOM_AUTH_BAD;
}
