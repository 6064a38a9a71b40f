/*
 * boom_vectors.c - test-vector tool for the C binding (used by tests/test_c_binding.py).
 *
 * Reads one command per line on stdin and writes one result line per command:
 *   air SEQ UTC F1 .. F18   encode an air frame; UTC and Fi are the 16 hex digits of a
 *                           double's IEEE 754 bits, "-" for an absent optional field;
 *                           prints "PAYLOAD STREAM DATAGRAM" in hex
 *   dec HEX                 decode a payload: "ok TYPE key=value ..." or "err REASON"
 *   deframe HEX             feed stream bytes: "n=COUNT HEX.. | ok crc cobs short over"
 *   dgram HEX               parse a datagram: "ok PAYLOAD" or "err REASON"
 *   crc HEX                 CRC-32C, 8 hex digits
 *   cobs HEX / uncobs HEX   COBS encode / decode ("ok HEX" or "err REASON")
 *   sha256 HEX              SHA-256 digest, 64 hex digits (FIPS 180-4)
 *   hmac KEYHEX MSGHEX      HMAC-SHA256 tag, 64 hex digits (RFC 2104)
 *   sign KEYHEX HEX         sign a frame payload: "ok HEX" or "err REASON"
 *   auth KEYHEX HEX         check a signed payload: "ok", "auth_missing" or "auth_bad"
 *   rfc4231                 run the RFC 4231 section 4 test cases: "ok 7" or "fail N"
 * Values in "dec" output: doubles as 16 hex digits of their bits, "-" for nil/absent,
 * strings as "s" + hex of their UTF-8 bytes, booleans T/F, integers in decimal.
 *
 * ADVISORY AID ONLY: not certified flight software.
 */
#include "boom_wire.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define LINE_MAX_BYTES (1 << 17)

static char line[LINE_MAX_BYTES];
static uint8_t data[LINE_MAX_BYTES / 2];
static uint8_t out[LINE_MAX_BYTES];

static int hexval(int c)
{
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    if (c >= 'A' && c <= 'F') return c - 'A' + 10;
    return -1;
}

/* Parse a hex token into data; returns its length, or -1. */
static long parse_hex(const char *s, uint8_t *dst, size_t cap)
{
    size_t n = 0;
    if (s == NULL)
        return 0;
    while (s[0] && s[1]) {
        int hi = hexval((unsigned char)s[0]), lo = hexval((unsigned char)s[1]);
        if (hi < 0 || lo < 0 || n >= cap)
            return -1;
        dst[n++] = (uint8_t)(hi * 16 + lo);
        s += 2;
    }
    return s[0] ? -1 : (long)n;
}

static void print_hex(const uint8_t *p, size_t n)
{
    size_t i;
    for (i = 0; i < n; i++)
        printf("%02x", p[i]);
}

static void print_double(const char *key, double d)
{
    uint64_t bits;
    memcpy(&bits, &d, sizeof bits);
    printf(" %s=%016llx", key, (unsigned long long)bits);
}

static void print_opt(const char *key, bool has, double d)
{
    if (has)
        print_double(key, d);
    else
        printf(" %s=-", key);
}

static void print_text(const char *key, const char *s)
{
    printf(" %s=s", key);
    print_hex((const uint8_t *)s, strlen(s));
}

static int parse_double(const char *tok, double *d, bool *has)
{
    uint64_t bits;
    char *end;
    if (tok == NULL)
        return -1;
    if (strcmp(tok, "-") == 0) {
        *has = false;
        *d = 0.0;
        return 0;
    }
    bits = strtoull(tok, &end, 16);
    if (*end != '\0' || strlen(tok) != 16)
        return -1;
    memcpy(d, &bits, sizeof bits);
    *has = true;
    return 0;
}

static void cmd_air(char *rest)
{
    boom_air a;
    double v[19];
    bool has[19];
    unsigned long seq;
    char *tok = strtok(rest, " ");
    size_t n = 0, m = 0;
    int i;
    uint8_t payload[BOOM_MAX_PAYLOAD];
    if (tok == NULL) {
        printf("err bad_argument\n");
        return;
    }
    seq = strtoul(tok, NULL, 10);
    for (i = 0; i < 19; i++) {
        if (parse_double(strtok(NULL, " "), &v[i], &has[i]) != 0 || (i < 9 && !has[i])) {
            printf("err bad_argument\n");
            return;
        }
    }
    boom_air_init(&a);
    a.lat_deg = v[1];
    a.lon_deg = v[2];
    a.alt_ft = v[3];
    a.mach = v[4];
    a.heading_deg = v[5];
    a.gs_kt = v[6];
    a.bank_deg = v[7];
    a.fpa_deg = v[8];
    a.has_track_deg = has[9];
    a.track_deg = v[9];
    a.has_mach_rate_per_s = has[10];
    a.mach_rate_per_s = v[10];
    a.has_sat_c = has[11];
    a.sat_c = v[11];
    a.has_wind_from_deg = has[12];
    a.wind_from_deg = v[12];
    a.has_wind_kt = has[13];
    a.wind_kt = v[13];
    a.has_pitch_rate_dps = has[14];
    a.pitch_rate_dps = v[14];
    a.has_load_factor = has[15];
    a.load_factor = v[15];
    a.has_selected_alt_ft = has[16];
    a.selected_alt_ft = v[16];
    a.has_selected_heading_deg = has[17];
    a.selected_heading_deg = v[17];
    a.has_selected_mach = has[18];
    a.selected_mach = v[18];
    if (boom_encode_air(&a, (uint32_t)seq, v[0], payload, sizeof payload, &n) != BOOM_OK) {
        printf("err encode\n");
        return;
    }
    print_hex(payload, n);
    printf(" ");
    if (boom_frame_stream(payload, n, out, sizeof out, &m) != BOOM_OK) {
        printf("err stream\n");
        return;
    }
    print_hex(out, m);
    printf(" ");
    if (boom_datagram(payload, n, out, sizeof out, &m) != BOOM_OK) {
        printf("err datagram\n");
        return;
    }
    print_hex(out, m);
    printf("\n");
}

static void cmd_dec(const uint8_t *p, size_t n)
{
    static boom_frame f;
    size_t i;
    int r = boom_decode_frame(p, n, &f);
    if (r != BOOM_OK) {
        printf("err %s\n", boom_result_name(r));
        return;
    }
    printf("ok %s seq=%lu", f.type == BOOM_FRAME_AIR ? "air" : f.type == BOOM_FRAME_ADV ? "adv"
                                                                                     : "status",
           (unsigned long)f.seq);
    print_double("utc_s", f.utc_s);
    if (f.type == BOOM_FRAME_AIR) {
        const boom_air *a = &f.u.air;
        print_double("lat_deg", a->lat_deg);
        print_double("lon_deg", a->lon_deg);
        print_double("alt_ft", a->alt_ft);
        print_double("mach", a->mach);
        print_double("heading_deg", a->heading_deg);
        print_double("gs_kt", a->gs_kt);
        print_double("bank_deg", a->bank_deg);
        print_double("fpa_deg", a->fpa_deg);
        print_opt("track_deg", a->has_track_deg, a->track_deg);
        print_opt("mach_rate_per_s", a->has_mach_rate_per_s, a->mach_rate_per_s);
        print_opt("sat_c", a->has_sat_c, a->sat_c);
        print_opt("wind_from_deg", a->has_wind_from_deg, a->wind_from_deg);
        print_opt("wind_kt", a->has_wind_kt, a->wind_kt);
        print_opt("pitch_rate_dps", a->has_pitch_rate_dps, a->pitch_rate_dps);
        print_opt("load_factor", a->has_load_factor, a->load_factor);
        print_opt("selected_alt_ft", a->has_selected_alt_ft, a->selected_alt_ft);
        print_opt("selected_heading_deg", a->has_selected_heading_deg,
                  a->selected_heading_deg);
        print_opt("selected_mach", a->has_selected_mach, a->selected_mach);
    } else if (f.type == BOOM_FRAME_ADV) {
        const boom_adv *a = &f.u.adv;
        printf(" status=%s", boom_adv_status_name(a->status));
        if (a->has_zone_id)
            print_text("zone_id", a->zone_id);
        else
            printf(" zone_id=-");
        print_opt("time_to_contact_s", a->has_time_to_contact_s, a->time_to_contact_s);
        print_opt("overpressure_psf", a->has_overpressure_psf, a->overpressure_psf);
        printf(" focus=%c", a->focus ? 'T' : 'F');
        print_opt("max_mach_off_ground", a->has_max_mach_off_ground, a->max_mach_off_ground);
        print_opt("turn_left_deg", a->has_turn_left_deg, a->turn_left_deg);
        print_opt("turn_right_deg", a->has_turn_right_deg, a->turn_right_deg);
        printf(" tables_stale=%c", a->tables_stale ? 'T' : 'F');
        print_text("cue", a->cue);
        print_opt("act_by_s", a->has_act_by_s, a->act_by_s);
        print_opt("resolve_mach", a->has_resolve_mach, a->resolve_mach);
        print_opt("turn_left_hdg", a->has_turn_left_hdg, a->turn_left_hdg);
        print_opt("turn_right_hdg", a->has_turn_right_hdg, a->turn_right_hdg);
        printf(" combined=%c", a->combined ? 'T' : 'F');
        if (a->near_cutoff)
            printf(" near_cutoff=T");
        if (a->has_boom_probability)
            print_opt("boom_probability", true, a->boom_probability);
        if (a->at_limit)
            printf(" at_limit=T");
        if (a->level_off)
            printf(" level_off=T");
        printf(" v=%u", f.version);
    } else {
        const boom_status *s = &f.u.status;
        printf(" state=%s", boom_state_name(s->state));
        print_text("reason", s->reason);
        printf(" counters=");
        for (i = 0; i < s->n_counters; i++) {
            if (i)
                printf(",");
            print_hex((const uint8_t *)s->counters[i].name, strlen(s->counters[i].name));
            printf(":%llu", (unsigned long long)s->counters[i].value);
        }
    }
    printf("\n");
}

static void cmd_deframe(const uint8_t *p, size_t n)
{
    static boom_deframer d;
    static uint8_t got[LINE_MAX_BYTES / 2];
    static size_t offs[LINE_MAX_BYTES / 8], lens[LINE_MAX_BYTES / 8];
    size_t i, k = 0, used = 0;
    boom_deframer_init(&d);
    for (i = 0; i < n; i++) {
        const uint8_t *pl;
        size_t len;
        if (boom_deframer_push(&d, p[i], &pl, &len)) {
            memcpy(got + used, pl, len);
            offs[k] = used;
            lens[k] = len;
            used += len;
            k++;
        }
    }
    printf("n=%lu", (unsigned long)k);
    for (i = 0; i < k; i++) {
        printf(" ");
        print_hex(got + offs[i], lens[i]);
    }
    printf(" | %llu %llu %llu %llu %llu\n", (unsigned long long)d.frames_ok,
           (unsigned long long)d.bad_crc, (unsigned long long)d.cobs_error,
           (unsigned long long)d.too_short, (unsigned long long)d.oversize);
}

/* RFC 4231 section 4, test cases 1-7 (HMAC-SHA-256); case 5 compares the first 16
 * bytes (the RFC truncates its output to 128 bits). */
static int rfc4231(void)
{
    static const char *big = "This is a test using a larger than block-size key and a larger "
                             "than block-size data. The key needs to be hashed before being "
                             "used by the HMAC algorithm.";
    static const char *want[7] = {
        "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7",
        "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843",
        "773ea91e36800e46854db8ebd09181a72959098b3ef8c122d9635514ced565fe",
        "82558a389a443c0ea4cc819899f2083a85f0faa3e578f8077a2e3ff46729665b",
        "a3b6167473100ee06e0c796c2955552b",
        "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54",
        "9b09ffa71b942fcb27635fbcd5b0e944bfdc63644f0713938a7f51535c3a35e2"};
    uint8_t key[131], msg[200], tag[32];
    char hex[65];
    size_t klen = 0, mlen = 0, i;
    int t;
    for (t = 0; t < 7; t++) {
        switch (t) {
        case 0: klen = 20; memset(key, 0x0b, klen); mlen = 8; memcpy(msg, "Hi There", 8); break;
        case 1:
            klen = 4; memcpy(key, "Jefe", 4);
            mlen = 28; memcpy(msg, "what do ya want for nothing?", 28);
            break;
        case 2: klen = 20; memset(key, 0xaa, klen); mlen = 50; memset(msg, 0xdd, 50); break;
        case 3:
            klen = 25;
            for (i = 0; i < 25; i++)
                key[i] = (uint8_t)(i + 1);
            mlen = 50; memset(msg, 0xcd, 50);
            break;
        case 4:
            klen = 20; memset(key, 0x0c, klen);
            mlen = 20; memcpy(msg, "Test With Truncation", 20);
            break;
        case 5:
            klen = 131; memset(key, 0xaa, klen);
            mlen = 54; memcpy(msg, "Test Using Larger Than Block-Size Key - Hash Key First", 54);
            break;
        default:
            klen = 131; memset(key, 0xaa, klen);
            mlen = strlen(big); memcpy(msg, big, mlen);
            break;
        }
        boom_hmac_sha256(key, klen, msg, mlen, tag);
        for (i = 0; i < 32; i++)
            sprintf(hex + 2 * i, "%02x", tag[i]);
        if (strncmp(hex, want[t], strlen(want[t])) != 0)
            return t + 1;
    }
    return 0;
}

/* Commands with a key and a second hex argument: hmac, sign, auth. */
static void cmd_keyed(const char *cmd, char *arg)
{
    static uint8_t key[LINE_MAX_BYTES / 4];
    char *second = arg != NULL ? strchr(arg, ' ') : NULL;
    long kn, n;
    size_t m;
    uint8_t tag[32];
    if (second == NULL) {
        printf("err bad_argument\n");
        return;
    }
    *second++ = '\0';
    kn = parse_hex(arg, key, sizeof key);
    n = parse_hex(second, data, sizeof data - 64);
    if (kn < 0 || n < 0) {
        printf("err bad_hex\n");
        return;
    }
    if (strcmp(cmd, "hmac") == 0) {
        boom_hmac_sha256(key, (size_t)kn, data, (size_t)n, tag);
        print_hex(tag, 32);
        printf("\n");
    } else if (strcmp(cmd, "sign") == 0) {
        int r = boom_sign_frame(data, (size_t)n, sizeof data, key, (size_t)kn, &m);
        if (r != BOOM_OK) {
            printf("err %s\n", boom_result_name(r));
            return;
        }
        printf("ok ");
        print_hex(data, m);
        printf("\n");
    } else {
        int r = boom_check_auth(data, (size_t)n, key, (size_t)kn);
        printf("%s\n", r == BOOM_AUTH_OK ? "ok" : r == BOOM_AUTH_MISSING ? "auth_missing"
                                                                          : "auth_bad");
    }
}

int main(void)
{
    while (fgets(line, sizeof line, stdin) != NULL) {
        char *cmd, *arg;
        long n;
        size_t m;
        int r;
        line[strcspn(line, "\r\n")] = '\0';
        cmd = strtok(line, " ");
        if (cmd == NULL)
            continue;
        arg = strtok(NULL, "");
        if (strcmp(cmd, "rfc4231") == 0) {
            int bad = rfc4231();
            if (bad)
                printf("fail %d\n", bad);
            else
                printf("ok 7\n");
            fflush(stdout);
            continue;
        }
        if (strcmp(cmd, "hmac") == 0 || strcmp(cmd, "sign") == 0 || strcmp(cmd, "auth") == 0) {
            cmd_keyed(cmd, arg);
            fflush(stdout);
            continue;
        }
        if (strcmp(cmd, "air") == 0) {
            if (arg == NULL) {
                printf("err bad_argument\n");
                continue;
            }
            cmd_air(arg);
            fflush(stdout);
            continue;
        }
        n = parse_hex(arg, data, sizeof data);
        if (n < 0) {
            printf("err bad_hex\n");
            continue;
        }
        if (strcmp(cmd, "dec") == 0) {
            cmd_dec(data, (size_t)n);
        } else if (strcmp(cmd, "deframe") == 0) {
            cmd_deframe(data, (size_t)n);
        } else if (strcmp(cmd, "dgram") == 0) {
            r = boom_parse_datagram(data, (size_t)n, &m);
            if (r != BOOM_OK) {
                printf("err %s\n", boom_result_name(r));
            } else {
                printf("ok ");
                print_hex(data, m);
                printf("\n");
            }
        } else if (strcmp(cmd, "sha256") == 0) {
            uint8_t digest[32];
            boom_sha256(data, (size_t)n, digest);
            print_hex(digest, 32);
            printf("\n");
        } else if (strcmp(cmd, "crc") == 0) {
            printf("%08lx\n", (unsigned long)boom_crc32c(0, data, (size_t)n));
        } else if (strcmp(cmd, "cobs") == 0) {
            m = boom_cobs_encode(data, (size_t)n, out, sizeof out);
            print_hex(out, m);
            printf("\n");
        } else if (strcmp(cmd, "uncobs") == 0) {
            r = boom_cobs_decode(data, (size_t)n, out, sizeof out, &m);
            if (r != BOOM_OK) {
                printf("err %s\n", boom_result_name(r));
            } else {
                printf("ok ");
                print_hex(out, m);
                printf("\n");
            }
        } else {
            printf("err unknown_command\n");
        }
        fflush(stdout);
    }
    return 0;
}
