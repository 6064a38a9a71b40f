/*
 * example_udp_receiver.c - read what a UDP `boom-advisory run` publishes.
 *
 * Binds HOST:PORT (the address named in the service's --output udp://HOST:PORT), checks
 * each datagram's CRC-32C (docs/interface.md section 10), decodes the frame and prints
 * one line per frame on standard output for SECONDS s, then a summary line:
 *   adv SEQ STATUS ZONE TIME_TO_CONTACT_S CUE
 *   status SEQ STATE REASON
 *   end adv=N status=N bad=N
 * ("-" for an absent value). A display built this way must blank or show "no data" when
 * no advisory frame has arrived for the display timeout of section 5.1.
 *
 * Usage: example_udp_receiver HOST PORT [SECONDS]    (default 10 s)
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
#include <sys/select.h>
#include <sys/socket.h>
#include <time.h>
#include <unistd.h>

static double mono_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + ts.tv_nsec * 1e-9;
}

int main(int argc, char **argv)
{
    double seconds = argc > 3 ? atof(argv[3]) : 10.0, end;
    static uint8_t buf[BOOM_MAX_DATAGRAM + 64];
    static boom_frame f;
    struct sockaddr_in me;
    long n_adv = 0, n_status = 0, n_bad = 0;
    int fd;
    if (argc < 3 || !(seconds > 0.0)) {
        fprintf(stderr, "usage: %s HOST PORT [SECONDS]\n", argv[0]);
        return 2;
    }
    memset(&me, 0, sizeof me);
    me.sin_family = AF_INET;
    me.sin_port = htons((uint16_t)atoi(argv[2]));
    if (inet_pton(AF_INET, argv[1], &me.sin_addr) != 1) {
        fprintf(stderr, "%s: %s is not an IPv4 address\n", argv[0], argv[1]);
        return 2;
    }
    fd = socket(AF_INET, SOCK_DGRAM, 0);
    if (fd < 0 || bind(fd, (const struct sockaddr *)&me, sizeof me) != 0) {
        perror("bind");
        return 1;
    }
    printf("listening\n");
    fflush(stdout);
    end = mono_s() + seconds;
    for (;;) {
        double left = end - mono_s();
        struct timeval tv;
        fd_set rd;
        ssize_t got;
        size_t len;
        int r;
        if (left <= 0)
            break;
        FD_ZERO(&rd);
        FD_SET(fd, &rd);
        tv.tv_sec = (long)left;
        tv.tv_usec = (long)((left - (double)tv.tv_sec) * 1e6);
        if (select(fd + 1, &rd, NULL, NULL, &tv) <= 0)
            continue;
        got = recv(fd, buf, sizeof buf, 0);
        if (got <= 0)
            continue;
        r = boom_parse_datagram(buf, (size_t)got, &len);
        if (r == BOOM_OK)
            r = boom_decode_frame(buf, len, &f);
        if (r != BOOM_OK) {
            n_bad++;
            printf("bad %s\n", boom_result_name(r));
        } else if (f.type == BOOM_FRAME_ADV) {
            n_adv++;
            printf("adv %lu %s %s ", (unsigned long)f.seq, boom_adv_status_name(f.u.adv.status),
                   f.u.adv.has_zone_id ? f.u.adv.zone_id : "-");
            if (f.u.adv.has_time_to_contact_s)
                printf("%.1f", f.u.adv.time_to_contact_s);
            else
                printf("-");
            printf(" %s\n", f.u.adv.cue[0] ? f.u.adv.cue : "-");
        } else if (f.type == BOOM_FRAME_STATUS) {
            n_status++;
            printf("status %lu %s %s\n", (unsigned long)f.seq, boom_state_name(f.u.status.state),
                   f.u.status.reason[0] ? f.u.status.reason : "-");
        }
        fflush(stdout);
    }
    close(fd);
    printf("end adv=%ld status=%ld bad=%ld\n", n_adv, n_status, n_bad);
    return 0;
}
