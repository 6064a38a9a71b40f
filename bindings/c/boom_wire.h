/*
 * boom_wire.h - the boom-advisory wire format for the other side of the link.
 *
 * C99, libc only. Encodes air-data frames and decodes advisory, status (and air-data)
 * frames byte for byte as the Python package does (advisory/io/messages.py), with the
 * same framing (advisory/io/framing.py): COBS + CRC-32C + 0x00 delimiter on byte
 * streams, payload + CRC-32C in one UDP datagram. The interface control document is
 * docs/interface.md.
 *
 * ADVISORY AID ONLY: boom-advisory is not certified flight software. Local regulations
 * and licensed practice govern supersonic flight.
 *
 * References: MessagePack specification (formats); S. Cheshire and M. Baker,
 * "Consistent Overhead Byte Stuffing", IEEE/ACM Trans. Networking 7(2), 1999 (COBS);
 * RFC 3720, 12.1 and B.4 (CRC-32C).
 *
 * No function allocates memory or keeps global state; all are reentrant.
 */
#ifndef BOOM_WIRE_H
#define BOOM_WIRE_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#define BOOM_WIRE_FORMAT_VERSION 1 /* air-data and status frames (ICD section 7) */
#define BOOM_ADV_FORMAT_VERSION 2  /* advisory frames: 2 since the status "unavoidable";
                                      version-1 advisory frames are read as well */
#define BOOM_MAX_PAYLOAD 4096 /* largest MessagePack payload, bytes */
#define BOOM_CRC_LEN 4        /* CRC-32C trailer, big-endian */
/* longest encoded stream frame without its delimiter (one byte of slack included) */
#define BOOM_MAX_ENCODED \
    (BOOM_MAX_PAYLOAD + BOOM_CRC_LEN + (BOOM_MAX_PAYLOAD + BOOM_CRC_LEN) / 254 + 2)
#define BOOM_MAX_STREAM_FRAME (BOOM_MAX_ENCODED + 1) /* with the 0x00 delimiter */
#define BOOM_MAX_DATAGRAM (BOOM_MAX_PAYLOAD + BOOM_CRC_LEN)
#define BOOM_MAX_DEPTH 16 /* container nesting, top-level map = 1 */
#define BOOM_ZONE_ID_MAX 63
#define BOOM_CUE_MAX 127
#define BOOM_REASON_MAX 127
#define BOOM_COUNTER_NAME_MAX 47
#define BOOM_MAX_COUNTERS 48

/* Results. The names (boom_result_name) are the Python FrameError reasons. */
typedef enum {
    BOOM_OK = 0,
    BOOM_E_OVERSIZE,            /* "oversize" */
    BOOM_E_MALFORMED,           /* "malformed": not one well-formed MessagePack object */
    BOOM_E_NOT_A_MAP,           /* "not_a_map" */
    BOOM_E_MISSING_FIELD,       /* "missing_field" */
    BOOM_E_BAD_TYPE,            /* "bad_type" */
    BOOM_E_BAD_VALUE,           /* "bad_value" */
    BOOM_E_UNSUPPORTED_VERSION, /* "unsupported_version" */
    BOOM_E_UNKNOWN_TYPE,        /* "unknown_type" */
    BOOM_E_TOO_SHORT,           /* "too_short": datagram / stream frame under 5 bytes */
    BOOM_E_BAD_CRC,             /* "bad_crc" */
    BOOM_E_COBS,                /* "cobs_error" */
    BOOM_E_NO_ROOM,             /* "no_room": output buffer too small */
    BOOM_E_ARG                  /* "bad_argument": NULL pointer or value out of range */
} boom_result;

const char *boom_result_name(int result);

typedef enum { BOOM_FRAME_AIR = 1, BOOM_FRAME_ADV = 2, BOOM_FRAME_STATUS = 3 } boom_frame_type;

/* Air data, wire units. Optional fields have a has_ flag (false: sent as nil). */
typedef struct {
    double lat_deg;     /* WGS 84 latitude, deg, -90..90 */
    double lon_deg;     /* WGS 84 longitude, deg, -180..180 */
    double alt_ft;      /* pressure altitude, ft */
    double mach;        /* flight Mach number */
    double heading_deg; /* true heading, deg clockwise from true north, 0..360 */
    double gs_kt;       /* ground speed, kt */
    double bank_deg;    /* bank, deg, positive right wing down */
    double fpa_deg;     /* flight-path angle, deg, positive climbing */
    bool has_track_deg;
    double track_deg; /* true track, deg */
    bool has_mach_rate_per_s;
    double mach_rate_per_s; /* dMach/dt, 1/s */
    bool has_sat_c;
    double sat_c; /* static air temperature, degC */
    bool has_wind_from_deg;
    double wind_from_deg; /* direction the wind blows from, deg true */
    bool has_wind_kt;
    double wind_kt; /* wind speed, kt */
    /* Added later (ICD section 4) in two groups: the pitch and load pair, then the
     * flight-guidance targets. The encoder writes every group up to the last one with a
     * has_ flag set (nil for a key of those groups whose flag is clear) and no group
     * after it: no flag set gives the first release's 13-field frame byte for byte, the
     * pair only the 15-field frame, any target the 18-field frame. */
    bool has_pitch_rate_dps;
    double pitch_rate_dps; /* body pitch rate, deg/s, nose up positive */
    bool has_load_factor;
    double load_factor; /* normal load factor, g (1 in level unaccelerated flight) */
    bool has_selected_alt_ft;
    double selected_alt_ft; /* selected altitude: pressure altitude the climb or descent
                               levels off at, ft */
    bool has_selected_heading_deg;
    double selected_heading_deg; /* selected heading: true heading the turn rolls out on,
                                    deg, 0..360 (360 excluded) */
    bool has_selected_mach;
    double selected_mach; /* selected Mach: Mach the acceleration or deceleration ends at */
} boom_air;

typedef enum {
    BOOM_ADV_NO_BOOM = 0,
    BOOM_ADV_CLEAR,
    BOOM_ADV_ADVISORY,
    BOOM_ADV_CAUTION,
    BOOM_ADV_WARNING,
    BOOM_ADV_UNAVAILABLE,
    BOOM_ADV_UNAVOIDABLE /* version 2: a boom that will reach a zone whatever is done */
} boom_adv_status;

typedef struct {
    boom_adv_status status;
    bool has_zone_id;
    char zone_id[BOOM_ZONE_ID_MAX + 1]; /* UTF-8, NUL-terminated */
    bool has_time_to_contact_s;
    double time_to_contact_s;
    bool has_overpressure_psf;
    double overpressure_psf;
    bool focus;
    bool has_max_mach_off_ground;
    double max_mach_off_ground;
    bool has_turn_left_deg;
    double turn_left_deg;
    bool has_turn_right_deg;
    double turn_right_deg;
    bool tables_stale;
    char cue[BOOM_CUE_MAX + 1]; /* UTF-8, NUL-terminated */
    /* optional keys (issue 13; absent: has_ false, combined false) */
    bool has_act_by_s;
    double act_by_s; /* s left to start the offered action */
    bool has_resolve_mach;
    double resolve_mach; /* Mach to decelerate to that clears every zone */
    bool has_turn_left_hdg;
    double turn_left_hdg; /* target heading of the left turn, deg true, 0..360 */
    bool has_turn_right_hdg;
    double turn_right_hdg; /* target heading of the right turn, deg true, 0..360 */
    bool combined;         /* the resolution is the Mach and the turn together */
    bool near_cutoff;      /* issue 14: Mach within the near-cutoff band (absent: false) */
    bool has_boom_probability; /* issue 16: sent only when known */
    double boom_probability;   /* probability the boom reaches the zone named (no zone named:
                                  the ground), 0..1 (ICD key 17) */
    bool at_limit; /* the resolution keeps the booms under each zone's limit itself, not
                      under the configured fraction of it (ICD key 18; absent: false) */
    bool level_off; /* the resolution was flown levelling the flight path from the
                       action's start; the crew line says LVL (ICD key 19; absent: false) */
} boom_adv;

typedef enum { BOOM_STATE_OK = 0, BOOM_STATE_DEGRADED, BOOM_STATE_UNAVAILABLE } boom_state;

typedef struct {
    char name[BOOM_COUNTER_NAME_MAX + 1];
    uint64_t value;
} boom_counter;

typedef struct {
    boom_state state;
    char reason[BOOM_REASON_MAX + 1];
    size_t n_counters; /* in first-appearance order on the wire */
    boom_counter counters[BOOM_MAX_COUNTERS];
} boom_status;

typedef struct {
    boom_frame_type type;
    uint32_t seq;
    double utc_s; /* sender's UTC, s since 1970 */
    unsigned version; /* the frame's format version (1, or 2 for an advisory frame) */
    union {
        boom_air air;
        boom_adv adv;
        boom_status status;
    } u;
} boom_frame;

const char *boom_adv_status_name(boom_adv_status s); /* "no_boom", ... */
const char *boom_state_name(boom_state s);           /* "ok", ... */

/* CRC-32C of data, continuing crc (0 to start). boom_crc32c(0, "123456789", 9) ==
 * 0xE3069283. */
uint32_t boom_crc32c(uint32_t crc, const uint8_t *data, size_t len);

/* COBS. Encode returns the encoded length (>= 1), or 0 if cap is too small; at most
 * len + len / 254 + 1 bytes. Decode returns BOOM_OK, BOOM_E_COBS or BOOM_E_NO_ROOM. */
size_t boom_cobs_encode(const uint8_t *src, size_t len, uint8_t *dst, size_t cap);
int boom_cobs_decode(const uint8_t *src, size_t len, uint8_t *dst, size_t cap,
                     size_t *out_len);

/* Set every field to 0 and every optional field absent. */
void boom_air_init(boom_air *air);

/* Encode an air-data frame payload in canonical key order. */
int boom_encode_air(const boom_air *air, uint32_t seq, double utc_s, uint8_t *out,
                    size_t cap, size_t *out_len);

/* Decode any frame payload (CRC already removed): the same checks, in the same order,
 * with the same results as the Python decode_frame. */
int boom_decode_frame(const uint8_t *payload, size_t len, boom_frame *out);

/* Stream framing: COBS(payload + CRC) + 0x00. cap >= BOOM_MAX_STREAM_FRAME always
 * suffices. */
int boom_frame_stream(const uint8_t *payload, size_t len, uint8_t *out, size_t cap,
                      size_t *out_len);

/* Datagram: payload + CRC. Parse checks size and CRC; the payload is data[0, *len). */
int boom_datagram(const uint8_t *payload, size_t len, uint8_t *out, size_t cap,
                  size_t *out_len);
int boom_parse_datagram(const uint8_t *data, size_t len, size_t *payload_len);

/* Streaming deframer: feed bytes one at a time; survives garbage and torn frames. */
typedef struct {
    uint8_t buf[BOOM_MAX_ENCODED];
    uint8_t payload[BOOM_MAX_PAYLOAD + BOOM_CRC_LEN];
    size_t n;
    bool discarding;
    uint64_t frames_ok, bad_crc, cobs_error, too_short, oversize;
} boom_deframer;

void boom_deframer_init(boom_deframer *d);
/* Returns 1 and sets *payload / *len when this byte completed a good frame (the payload
 * stays valid until the next call), else 0. */
int boom_deframer_push(boom_deframer *d, uint8_t byte, const uint8_t **payload,
                       size_t *len);

/* ---- Authenticated frames (docs/interface.md section 7.1; boom_auth.c) -------------
 * A signed frame ends with the map entry "auth": bin 8 of 32 bytes, the HMAC-SHA256
 * (RFC 2104, FIPS 180-4) over every payload byte before the tag, under a shared key of
 * at least BOOM_AUTH_KEY_MIN bytes. Receivers that do not check tags ignore the entry
 * (an unknown field). */
#define BOOM_AUTH_TAG_LEN 32
#define BOOM_AUTH_KEY_MIN 32
#define BOOM_AUTH_OK 0
#define BOOM_AUTH_MISSING 1 /* "auth_missing": the payload does not end with the entry */
#define BOOM_AUTH_BAD 2     /* "auth_bad": the tag does not match */

typedef struct {
    uint32_t h[8];
    uint64_t bits;
    uint8_t block[64];
    size_t used;
} boom_sha256_ctx;

void boom_sha256_init(boom_sha256_ctx *c);
void boom_sha256_update(boom_sha256_ctx *c, const uint8_t *data, size_t len);
void boom_sha256_final(boom_sha256_ctx *c, uint8_t out[32]);
void boom_sha256(const uint8_t *data, size_t len, uint8_t out[32]);
void boom_hmac_sha256(const uint8_t *key, size_t key_len, const uint8_t *msg, size_t len,
                      uint8_t out[32]);

/* Sign an encoded frame in place: buf holds len bytes, cap is its size. The map header
 * grows by one entry (a fixmap of 15 becomes a map 16) and the entry is appended.
 * Returns BOOM_OK and sets *out_len, or BOOM_E_ARG (not a map) / BOOM_E_NO_ROOM. */
int boom_sign_frame(uint8_t *buf, size_t len, size_t cap, const uint8_t *key,
                    size_t key_len, size_t *out_len);
/* BOOM_AUTH_OK, BOOM_AUTH_MISSING or BOOM_AUTH_BAD; the tag compare takes the same time
 * whatever the bytes. */
int boom_check_auth(const uint8_t *payload, size_t len, const uint8_t *key,
                    size_t key_len);

#ifdef __cplusplus
}
#endif

#endif /* BOOM_WIRE_H */
