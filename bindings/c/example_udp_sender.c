/*
 * example_udp_sender.c - drive a UDP `boom-advisory run` with air-data frames.
 *
 * Sends one air-data datagram (payload + CRC-32C, docs/interface.md section 10) every
 * 1/RATE_HZ s of real time for SECONDS s, from one socket (one source address and port:
 * the service admits only the first source it sees, or those of --allow-from). With a
 * KEY_FILE (hex digits on one line, at least 32 bytes) every frame is signed with
 * HMAC-SHA256 (section 7.1), for a service started with --auth-key.
 *
 * Usage: example_udp_sender HOST PORT [SECONDS [RATE_HZ [KEY_FILE]]]
 *        (defaults: 10 s at 20 Hz, unsigned)
 *
 * The flight is invented: a fictional aircraft in level flight east at Mach 1.4,
 * 45,000 ft, from 40 N 100 W; ground speed from the standard atmosphere's speed of
 * sound at that level, 295.07 m/s (U.S. Standard Atmosphere 1976, value from memory).
 * Prints "sent N" on standard output at the end.
 *
 * ADVISORY AID ONLY: boom-advisory is not certified flight software. Local regulations
 * and licensed practice govern supersonic flight.
 */
#include "boom_wire.h"

#include <arpa/inet.h>
#include <netinet/in.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <time.h>
#include <unistd.h>

#define KT_MPS (1852.0 / 3600.0) /* 1 kt in m/s (exact definition, NIST SP 811) */
#define COS_40_DEG 0.766044443118978 /* cos(40 deg): the start latitude, no libm */

static double now_s(clockid_t clk)
{
    struct timespec ts;
    clock_gettime(clk, &ts);
    return (double)ts.tv_sec + ts.tv_nsec * 1e-9;
}

/* Read a hex key file; returns the key length, or -1. */
static long read_key(const char *path, uint8_t *key, size_t cap)
{
    FILE *f = fopen(path, "r");
    long n = 0;
    int hi = -1, c;
    if (f == NULL)
        return -1;
    while ((c = fgetc(f)) != EOF) {
        int v;
        if (c >= '0' && c <= '9') v = c - '0';
        else if (c >= 'a' && c <= 'f') v = c - 'a' + 10;
        else if (c >= 'A' && c <= 'F') v = c - 'A' + 10;
        else if (c == '\n' || c == '\r' || c == ' ') continue;
        else { n = -1; break; }
        if (hi < 0) {
            hi = v;
        } else {
            if ((size_t)n >= cap) { n = -1; break; }
            key[n++] = (uint8_t)(hi << 4 | v);
            hi = -1;
        }
    }
    fclose(f);
    return hi >= 0 ? -1 : n;
}

int main(int argc, char **argv)
{
    const double sound_mps = 295.07, mach = 1.4, m_per_deg_lat = 111320.0;
    double seconds = argc > 3 ? atof(argv[3]) : 10.0;
    double rate_hz = argc > 4 ? atof(argv[4]) : 20.0;
    uint8_t key[256], payload[BOOM_MAX_PAYLOAD], dgram[BOOM_MAX_DATAGRAM];
    long key_len = 0, sent = 0;
    struct sockaddr_in to;
    double t0, gs_mps = mach * sound_mps;
    uint32_t seq = 0;
    int fd;
    if (argc < 3 || !(seconds > 0.0) || !(rate_hz > 0.0 && rate_hz <= 100.0)) {
        fprintf(stderr, "usage: %s HOST PORT [SECONDS [RATE_HZ [KEY_FILE]]]\n", argv[0]);
        return 2;
    }
    if (argc > 5) {
        key_len = read_key(argv[5], key, sizeof key);
        if (key_len < BOOM_AUTH_KEY_MIN) {
            fprintf(stderr, "%s: key file %s: need hex digits, at least %d bytes\n", argv[0],
                    argv[5], BOOM_AUTH_KEY_MIN);
            return 2;
        }
    }
    memset(&to, 0, sizeof to);
    to.sin_family = AF_INET;
    to.sin_port = htons((uint16_t)atoi(argv[2]));
    if (inet_pton(AF_INET, argv[1], &to.sin_addr) != 1) {
        fprintf(stderr, "%s: %s is not an IPv4 address\n", argv[0], argv[1]);
        return 2;
    }
    fd = socket(AF_INET, SOCK_DGRAM, 0);
    if (fd < 0) {
        perror("socket");
        return 1;
    }
    t0 = now_s(CLOCK_MONOTONIC);
    for (;;) {
        double t = now_s(CLOCK_MONOTONIC) - t0;
        double next = (double)(seq + 1) / rate_hz;
        struct timespec nap;
        boom_air a;
        size_t n, m;
        int r;
        if (t >= seconds)
            break;
        boom_air_init(&a);
        a.lat_deg = 40.0;
        a.lon_deg = -100.0 + gs_mps * t / (m_per_deg_lat * COS_40_DEG);
        a.alt_ft = 45000.0;
        a.mach = mach;
        a.heading_deg = 90.0;
        a.gs_kt = gs_mps / KT_MPS;
        a.bank_deg = 0.0;
        a.fpa_deg = 0.0;
        r = boom_encode_air(&a, seq, now_s(CLOCK_REALTIME), payload, sizeof payload, &n);
        if (r == BOOM_OK && key_len > 0)
            r = boom_sign_frame(payload, n, sizeof payload, key, (size_t)key_len, &n);
        if (r == BOOM_OK)
            r = boom_datagram(payload, n, dgram, sizeof dgram, &m);
        if (r != BOOM_OK) {
            fprintf(stderr, "encode failed: %s\n", boom_result_name(r));
            return 1;
        }
        if (sendto(fd, dgram, m, 0, (const struct sockaddr *)&to, sizeof to) == (ssize_t)m)
            sent++;
        seq++;
        t = next - (now_s(CLOCK_MONOTONIC) - t0);
        if (t > 0) {
            nap.tv_sec = (time_t)t;
            nap.tv_nsec = (long)((t - (double)nap.tv_sec) * 1e9);
            nanosleep(&nap, NULL);
        }
    }
    close(fd);
    printf("sent %ld\n", sent);
    fprintf(stderr, "advisory aid only, not certified flight software\n");
    return 0;
}
