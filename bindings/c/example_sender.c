/*
 * example_sender.c - how an integrator uses boom_wire: encode air-data frames for a
 * short invented straight-and-level run and write them, stream-framed (COBS + CRC-32C
 * + 0x00), to a file, a serial device configured beforehand (e.g. with stty), or stdout.
 * Then decode a sample advisory frame to show the receive side.
 *
 * Usage: example_sender [COUNT [OUTPUT_PATH]]    (default 20 frames to stdout)
 *
 * The flight is a fictional aircraft at Mach 1.4, 45,000 ft, heading 090, over invented
 * coordinates; 20 frames per second of flight time (not paced: this writes at once).
 *
 * ADVISORY AID ONLY: boom-advisory is not certified flight software. Local regulations
 * and licensed practice govern supersonic flight.
 */
#include "boom_wire.h"

#include <stdio.h>
#include <stdlib.h>

/* A sample advisory payload as the Python side would send it (built by hand here). */
static const uint8_t sample_adv[] = {
    0x8e, 0xa1, 0x76, 0x01, 0xa4, 't', 'y', 'p', 'e', 0xa3, 'a', 'd', 'v', 0xa3, 's', 'e', 'q',
    0x05, 0xa5, 'u', 't', 'c', '_', 's', 0xcb, 0x41, 0xd9, 0x54, 0xfc, 0x40, 0x00, 0x00, 0x00,
    0xa6, 's', 't', 'a', 't', 'u', 's', 0xa7, 'c', 'a', 'u', 't', 'i', 'o', 'n',
    0xa7, 'z', 'o', 'n', 'e', '_', 'i', 'd', 0xa6, 'z', 'o', 'n', 'e', '-', '7',
    0xb1, 't', 'i', 'm', 'e', '_', 't', 'o', '_', 'c', 'o', 'n', 't', 'a', 'c', 't', '_', 's',
    0xcb, 0x40, 0x5e, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
    0xb0, 'o', 'v', 'e', 'r', 'p', 'r', 'e', 's', 's', 'u', 'r', 'e', '_', 'p', 's', 'f',
    0xcb, 0x3f, 0xf8, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
    0xa5, 'f', 'o', 'c', 'u', 's', 0xc2,
    0xb3, 'm', 'a', 'x', '_', 'm', 'a', 'c', 'h', '_', 'o', 'f', 'f', '_', 'g', 'r', 'o', 'u',
    'n', 'd', 0xcb, 0x3f, 0xf1, 0xeb, 0x85, 0x1e, 0xb8, 0x51, 0xec,
    0xad, 't', 'u', 'r', 'n', '_', 'l', 'e', 'f', 't', '_', 'd', 'e', 'g', 0xc0,
    0xae, 't', 'u', 'r', 'n', '_', 'r', 'i', 'g', 'h', 't', '_', 'd', 'e', 'g',
    0xcb, 0x40, 0x34, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
    0xac, 't', 'a', 'b', 'l', 'e', 's', '_', 's', 't', 'a', 'l', 'e', 0xc2,
    0xa3, 'c', 'u', 'e', 0xa9, 'S', 'L', 'O', 'W', ' ', '1', '.', '1', '2',
};

int main(int argc, char **argv)
{
    long count = argc > 1 ? strtol(argv[1], NULL, 10) : 20;
    FILE *out = stdout;
    uint8_t payload[BOOM_MAX_PAYLOAD], framed[BOOM_MAX_STREAM_FRAME];
    boom_frame frame;
    size_t n, m;
    long i;
    int r;
    if (argc > 2) {
        out = fopen(argv[2], "wb");
        if (out == NULL) {
            perror(argv[2]);
            return 1;
        }
    }
    for (i = 0; i < count; i++) {
        boom_air a;
        double t = (double)i * 0.05; /* 20 Hz */
        boom_air_init(&a);
        a.lat_deg = 40.0;
        a.lon_deg = -100.0 + t * 0.0045; /* about 380 m/s east */
        a.alt_ft = 45000.0;
        a.mach = 1.4;
        a.heading_deg = 90.0;
        a.gs_kt = 740.0;
        a.bank_deg = 0.0;
        a.fpa_deg = 0.0;
        a.has_sat_c = true;
        a.sat_c = -56.5;
        a.has_wind_from_deg = true;
        a.wind_from_deg = 270.0;
        a.has_wind_kt = true;
        a.wind_kt = 25.0;
        r = boom_encode_air(&a, (uint32_t)i, 1893456000.0 + t, payload, sizeof payload, &n);
        if (r == BOOM_OK)
            r = boom_frame_stream(payload, n, framed, sizeof framed, &m);
        if (r != BOOM_OK) {
            fprintf(stderr, "encode failed: %s\n", boom_result_name(r));
            return 1;
        }
        if (fwrite(framed, 1, m, out) != m) {
            perror("write");
            return 1;
        }
    }
    if (out != stdout)
        fclose(out);
    else
        fflush(out);

    r = boom_decode_frame(sample_adv, sizeof sample_adv, &frame);
    if (r != BOOM_OK || frame.type != BOOM_FRAME_ADV) {
        fprintf(stderr, "sample advisory did not decode: %s\n", boom_result_name(r));
        return 1;
    }
    fprintf(stderr,
            "sent %ld air frames; sample advisory: %s zone %s, contact in %.0f s, "
            "cue \"%s\" (advisory aid only, not certified flight software)\n",
            count, boom_adv_status_name(frame.u.adv.status),
            frame.u.adv.has_zone_id ? frame.u.adv.zone_id : "-", frame.u.adv.time_to_contact_s,
            frame.u.adv.cue);
    return 0;
}
