/*
 * boom_wire.c - see boom_wire.h. C99, libc only.
 *
 * ADVISORY AID ONLY: boom-advisory is not certified flight software. Local regulations
 * and licensed practice govern supersonic flight.
 */
#include "boom_wire.h"

#include <string.h>

/* ------------------------------------------------------------------- CRC-32C */
/* Table for the reflected Castagnoli polynomial 0x82F63B78 (RFC 3720, 12.1). */
static const uint32_t crc_table[256] = {
    0x00000000u, 0xF26B8303u, 0xE13B70F7u, 0x1350F3F4u, 0xC79A971Fu, 0x35F1141Cu,
    0x26A1E7E8u, 0xD4CA64EBu, 0x8AD958CFu, 0x78B2DBCCu, 0x6BE22838u, 0x9989AB3Bu,
    0x4D43CFD0u, 0xBF284CD3u, 0xAC78BF27u, 0x5E133C24u, 0x105EC76Fu, 0xE235446Cu,
    0xF165B798u, 0x030E349Bu, 0xD7C45070u, 0x25AFD373u, 0x36FF2087u, 0xC494A384u,
    0x9A879FA0u, 0x68EC1CA3u, 0x7BBCEF57u, 0x89D76C54u, 0x5D1D08BFu, 0xAF768BBCu,
    0xBC267848u, 0x4E4DFB4Bu, 0x20BD8EDEu, 0xD2D60DDDu, 0xC186FE29u, 0x33ED7D2Au,
    0xE72719C1u, 0x154C9AC2u, 0x061C6936u, 0xF477EA35u, 0xAA64D611u, 0x580F5512u,
    0x4B5FA6E6u, 0xB93425E5u, 0x6DFE410Eu, 0x9F95C20Du, 0x8CC531F9u, 0x7EAEB2FAu,
    0x30E349B1u, 0xC288CAB2u, 0xD1D83946u, 0x23B3BA45u, 0xF779DEAEu, 0x05125DADu,
    0x1642AE59u, 0xE4292D5Au, 0xBA3A117Eu, 0x4851927Du, 0x5B016189u, 0xA96AE28Au,
    0x7DA08661u, 0x8FCB0562u, 0x9C9BF696u, 0x6EF07595u, 0x417B1DBCu, 0xB3109EBFu,
    0xA0406D4Bu, 0x522BEE48u, 0x86E18AA3u, 0x748A09A0u, 0x67DAFA54u, 0x95B17957u,
    0xCBA24573u, 0x39C9C670u, 0x2A993584u, 0xD8F2B687u, 0x0C38D26Cu, 0xFE53516Fu,
    0xED03A29Bu, 0x1F682198u, 0x5125DAD3u, 0xA34E59D0u, 0xB01EAA24u, 0x42752927u,
    0x96BF4DCCu, 0x64D4CECFu, 0x77843D3Bu, 0x85EFBE38u, 0xDBFC821Cu, 0x2997011Fu,
    0x3AC7F2EBu, 0xC8AC71E8u, 0x1C661503u, 0xEE0D9600u, 0xFD5D65F4u, 0x0F36E6F7u,
    0x61C69362u, 0x93AD1061u, 0x80FDE395u, 0x72966096u, 0xA65C047Du, 0x5437877Eu,
    0x4767748Au, 0xB50CF789u, 0xEB1FCBADu, 0x197448AEu, 0x0A24BB5Au, 0xF84F3859u,
    0x2C855CB2u, 0xDEEEDFB1u, 0xCDBE2C45u, 0x3FD5AF46u, 0x7198540Du, 0x83F3D70Eu,
    0x90A324FAu, 0x62C8A7F9u, 0xB602C312u, 0x44694011u, 0x5739B3E5u, 0xA55230E6u,
    0xFB410CC2u, 0x092A8FC1u, 0x1A7A7C35u, 0xE811FF36u, 0x3CDB9BDDu, 0xCEB018DEu,
    0xDDE0EB2Au, 0x2F8B6829u, 0x82F63B78u, 0x709DB87Bu, 0x63CD4B8Fu, 0x91A6C88Cu,
    0x456CAC67u, 0xB7072F64u, 0xA457DC90u, 0x563C5F93u, 0x082F63B7u, 0xFA44E0B4u,
    0xE9141340u, 0x1B7F9043u, 0xCFB5F4A8u, 0x3DDE77ABu, 0x2E8E845Fu, 0xDCE5075Cu,
    0x92A8FC17u, 0x60C37F14u, 0x73938CE0u, 0x81F80FE3u, 0x55326B08u, 0xA759E80Bu,
    0xB4091BFFu, 0x466298FCu, 0x1871A4D8u, 0xEA1A27DBu, 0xF94AD42Fu, 0x0B21572Cu,
    0xDFEB33C7u, 0x2D80B0C4u, 0x3ED04330u, 0xCCBBC033u, 0xA24BB5A6u, 0x502036A5u,
    0x4370C551u, 0xB11B4652u, 0x65D122B9u, 0x97BAA1BAu, 0x84EA524Eu, 0x7681D14Du,
    0x2892ED69u, 0xDAF96E6Au, 0xC9A99D9Eu, 0x3BC21E9Du, 0xEF087A76u, 0x1D63F975u,
    0x0E330A81u, 0xFC588982u, 0xB21572C9u, 0x407EF1CAu, 0x532E023Eu, 0xA145813Du,
    0x758FE5D6u, 0x87E466D5u, 0x94B49521u, 0x66DF1622u, 0x38CC2A06u, 0xCAA7A905u,
    0xD9F75AF1u, 0x2B9CD9F2u, 0xFF56BD19u, 0x0D3D3E1Au, 0x1E6DCDEEu, 0xEC064EEDu,
    0xC38D26C4u, 0x31E6A5C7u, 0x22B65633u, 0xD0DDD530u, 0x0417B1DBu, 0xF67C32D8u,
    0xE52CC12Cu, 0x1747422Fu, 0x49547E0Bu, 0xBB3FFD08u, 0xA86F0EFCu, 0x5A048DFFu,
    0x8ECEE914u, 0x7CA56A17u, 0x6FF599E3u, 0x9D9E1AE0u, 0xD3D3E1ABu, 0x21B862A8u,
    0x32E8915Cu, 0xC083125Fu, 0x144976B4u, 0xE622F5B7u, 0xF5720643u, 0x07198540u,
    0x590AB964u, 0xAB613A67u, 0xB831C993u, 0x4A5A4A90u, 0x9E902E7Bu, 0x6CFBAD78u,
    0x7FAB5E8Cu, 0x8DC0DD8Fu, 0xE330A81Au, 0x115B2B19u, 0x020BD8EDu, 0xF0605BEEu,
    0x24AA3F05u, 0xD6C1BC06u, 0xC5914FF2u, 0x37FACCF1u, 0x69E9F0D5u, 0x9B8273D6u,
    0x88D28022u, 0x7AB90321u, 0xAE7367CAu, 0x5C18E4C9u, 0x4F48173Du, 0xBD23943Eu,
    0xF36E6F75u, 0x0105EC76u, 0x12551F82u, 0xE03E9C81u, 0x34F4F86Au, 0xC69F7B69u,
    0xD5CF889Du, 0x27A40B9Eu, 0x79B737BAu, 0x8BDCB4B9u, 0x988C474Du, 0x6AE7C44Eu,
    0xBE2DA0A5u, 0x4C4623A6u, 0x5F16D052u, 0xAD7D5351u,
};

uint32_t boom_crc32c(uint32_t crc, const uint8_t *data, size_t len)
{
    uint32_t c = crc ^ 0xFFFFFFFFu;
    size_t i;
    for (i = 0; i < len; i++)
        c = crc_table[(c ^ data[i]) & 0xFFu] ^ (c >> 8);
    return c ^ 0xFFFFFFFFu;
}

const char *boom_result_name(int result)
{
    switch (result) {
    case BOOM_OK: return "ok";
    case BOOM_E_OVERSIZE: return "oversize";
    case BOOM_E_MALFORMED: return "malformed";
    case BOOM_E_NOT_A_MAP: return "not_a_map";
    case BOOM_E_MISSING_FIELD: return "missing_field";
    case BOOM_E_BAD_TYPE: return "bad_type";
    case BOOM_E_BAD_VALUE: return "bad_value";
    case BOOM_E_UNSUPPORTED_VERSION: return "unsupported_version";
    case BOOM_E_UNKNOWN_TYPE: return "unknown_type";
    case BOOM_E_TOO_SHORT: return "too_short";
    case BOOM_E_BAD_CRC: return "bad_crc";
    case BOOM_E_COBS: return "cobs_error";
    case BOOM_E_NO_ROOM: return "no_room";
    case BOOM_E_ARG: return "bad_argument";
    default: return "unknown_result";
    }
}

/* In boom_adv_status order; the last one only in version-2 advisory frames. */
static const char *const adv_status_names[] = {"no_boom", "clear", "advisory", "caution",
                                               "warning", "unavailable", "unavoidable"};
static const char *const state_names[] = {"ok", "degraded", "unavailable"};

const char *boom_adv_status_name(boom_adv_status s)
{
    return ((unsigned)s < 7u) ? adv_status_names[s] : "?";
}

const char *boom_state_name(boom_state s)
{
    return ((unsigned)s < 3u) ? state_names[s] : "?";
}

/* ---------------------------------------------------------------------- COBS */
/* Cheshire and Baker (1999) code blocks; a packet ending in a full 254-byte block gets
 * no trailing 0x01 block (the decoder accepts both forms). */
size_t boom_cobs_encode(const uint8_t *src, size_t len, uint8_t *dst, size_t cap)
{
    size_t code_pos = 0, out = 1, i;
    uint8_t code = 1;
    if (dst == NULL || cap < 1 || (src == NULL && len > 0))
        return 0;
    for (i = 0; i < len; i++) {
        if (src[i] == 0) {
            dst[code_pos] = code;
            code = 1;
            code_pos = out;
            if (out >= cap)
                return 0;
            out++;
        } else {
            if (out >= cap)
                return 0;
            dst[out++] = src[i];
            code++;
            if (code == 0xFF) {
                dst[code_pos] = code;
                code = 1;
                code_pos = out;
                if (i + 1 == len)
                    return out; /* ended on a full block */
                if (out >= cap)
                    return 0;
                out++;
            }
        }
    }
    dst[code_pos] = code;
    return out;
}

/* Shared by boom_cobs_decode and the deframer: same rules as the Python kernel. */
static int cobs_decode_into(const uint8_t *src, size_t len, uint8_t *dst, size_t cap,
                            size_t *out_len)
{
    size_t i = 0, n = 0;
    if (len == 0)
        return BOOM_E_COBS;
    while (i < len) {
        size_t k, j;
        uint8_t code = src[i];
        if (code == 0)
            return BOOM_E_COBS;
        i++;
        k = (size_t)code - 1u;
        if (k > len - i)
            return BOOM_E_COBS;
        if (k > cap - n)
            return BOOM_E_NO_ROOM;
        for (j = 0; j < k; j++) {
            if (src[i + j] == 0)
                return BOOM_E_COBS;
            dst[n + j] = src[i + j];
        }
        n += k;
        i += k;
        if (code != 0xFF && i < len) {
            if (n >= cap)
                return BOOM_E_NO_ROOM;
            dst[n++] = 0;
        }
    }
    *out_len = n;
    return BOOM_OK;
}

int boom_cobs_decode(const uint8_t *src, size_t len, uint8_t *dst, size_t cap,
                     size_t *out_len)
{
    if ((src == NULL && len > 0) || (dst == NULL && cap > 0) || out_len == NULL)
        return BOOM_E_ARG;
    return cobs_decode_into(src, len, dst, cap, out_len);
}

/* ------------------------------------------------------------ framing, CRC */
static void put_be32(uint8_t *p, uint32_t v)
{
    p[0] = (uint8_t)(v >> 24);
    p[1] = (uint8_t)(v >> 16);
    p[2] = (uint8_t)(v >> 8);
    p[3] = (uint8_t)v;
}

static uint32_t get_be32(const uint8_t *p)
{
    return ((uint32_t)p[0] << 24) | ((uint32_t)p[1] << 16) | ((uint32_t)p[2] << 8) |
           (uint32_t)p[3];
}

int boom_frame_stream(const uint8_t *payload, size_t len, uint8_t *out, size_t cap,
                      size_t *out_len)
{
    uint8_t tmp[BOOM_MAX_PAYLOAD + BOOM_CRC_LEN];
    size_t n;
    if ((payload == NULL && len > 0) || out == NULL || out_len == NULL)
        return BOOM_E_ARG;
    if (len > BOOM_MAX_PAYLOAD)
        return BOOM_E_OVERSIZE;
    if (len > 0)
        memcpy(tmp, payload, len);
    put_be32(tmp + len, boom_crc32c(0, payload, len));
    n = boom_cobs_encode(tmp, len + BOOM_CRC_LEN, out, cap);
    if (n == 0 || n >= cap)
        return BOOM_E_NO_ROOM;
    out[n] = 0;
    *out_len = n + 1;
    return BOOM_OK;
}

int boom_datagram(const uint8_t *payload, size_t len, uint8_t *out, size_t cap,
                  size_t *out_len)
{
    if ((payload == NULL && len > 0) || out == NULL || out_len == NULL)
        return BOOM_E_ARG;
    if (len > BOOM_MAX_PAYLOAD)
        return BOOM_E_OVERSIZE;
    if (cap < len + BOOM_CRC_LEN)
        return BOOM_E_NO_ROOM;
    if (len > 0)
        memmove(out, payload, len);
    put_be32(out + len, boom_crc32c(0, out, len));
    *out_len = len + BOOM_CRC_LEN;
    return BOOM_OK;
}

int boom_parse_datagram(const uint8_t *data, size_t len, size_t *payload_len)
{
    if ((data == NULL && len > 0) || payload_len == NULL)
        return BOOM_E_ARG;
    if (len < BOOM_CRC_LEN + 1)
        return BOOM_E_TOO_SHORT;
    if (len > BOOM_MAX_DATAGRAM)
        return BOOM_E_OVERSIZE;
    if (boom_crc32c(0, data, len - BOOM_CRC_LEN) != get_be32(data + len - BOOM_CRC_LEN))
        return BOOM_E_BAD_CRC;
    *payload_len = len - BOOM_CRC_LEN;
    return BOOM_OK;
}

void boom_deframer_init(boom_deframer *d)
{
    memset(d, 0, sizeof *d);
}

int boom_deframer_push(boom_deframer *d, uint8_t byte, const uint8_t **payload,
                       size_t *len)
{
    size_t n;
    int r;
    if (byte != 0) {
        if (d->discarding)
            return 0;
        if (d->n == BOOM_MAX_ENCODED) {
            d->oversize++;
            d->discarding = true;
            d->n = 0;
            return 0;
        }
        d->buf[d->n++] = byte;
        return 0;
    }
    if (d->discarding) {
        d->discarding = false;
        return 0;
    }
    n = d->n;
    d->n = 0;
    if (n == 0)
        return 0;
    r = cobs_decode_into(d->buf, n, d->payload, sizeof d->payload, &n);
    if (r == BOOM_E_NO_ROOM) {
        d->oversize++;
        return 0;
    }
    if (r != BOOM_OK) {
        d->cobs_error++;
        return 0;
    }
    if (n < BOOM_CRC_LEN + 1) {
        d->too_short++;
        return 0;
    }
    if (boom_crc32c(0, d->payload, n - BOOM_CRC_LEN) !=
        get_be32(d->payload + n - BOOM_CRC_LEN)) {
        d->bad_crc++;
        return 0;
    }
    d->frames_ok++;
    if (payload != NULL)
        *payload = d->payload;
    if (len != NULL)
        *len = n - BOOM_CRC_LEN;
    return 1;
}

/* ------------------------------------------------------- MessagePack writer */
typedef struct {
    uint8_t *p;
    size_t n, cap;
    bool full;
} writer;

static void w_byte(writer *w, uint8_t b)
{
    if (w->n < w->cap)
        w->p[w->n++] = b;
    else
        w->full = true;
}

static void w_bytes(writer *w, const uint8_t *b, size_t len)
{
    size_t i;
    for (i = 0; i < len; i++)
        w_byte(w, b[i]);
}

static void w_str(writer *w, const char *s)
{
    size_t len = strlen(s);
    if (len <= 31) {
        w_byte(w, (uint8_t)(0xA0u | len));
    } else if (len <= 0xFF) {
        w_byte(w, 0xD9);
        w_byte(w, (uint8_t)len);
    } else {
        w_byte(w, 0xDA);
        w_byte(w, (uint8_t)(len >> 8));
        w_byte(w, (uint8_t)len);
    }
    w_bytes(w, (const uint8_t *)s, len);
}

static void w_uint(writer *w, uint64_t v)
{
    int i, nbytes;
    if (v <= 0x7F) {
        w_byte(w, (uint8_t)v);
        return;
    }
    if (v <= 0xFF) {
        w_byte(w, 0xCC);
        nbytes = 1;
    } else if (v <= 0xFFFF) {
        w_byte(w, 0xCD);
        nbytes = 2;
    } else if (v <= 0xFFFFFFFFu) {
        w_byte(w, 0xCE);
        nbytes = 4;
    } else {
        w_byte(w, 0xCF);
        nbytes = 8;
    }
    for (i = nbytes - 1; i >= 0; i--)
        w_byte(w, (uint8_t)(v >> (8 * i)));
}

static void w_double(writer *w, double d)
{
    uint64_t bits;
    int i;
    memcpy(&bits, &d, sizeof bits);
    w_byte(w, 0xCB);
    for (i = 7; i >= 0; i--)
        w_byte(w, (uint8_t)(bits >> (8 * i)));
}

static void w_opt_double(writer *w, bool has, double d)
{
    if (has)
        w_double(w, d);
    else
        w_byte(w, 0xC0);
}

void boom_air_init(boom_air *air)
{
    memset(air, 0, sizeof *air);
}

int boom_encode_air(const boom_air *a, uint32_t seq, double utc_s, uint8_t *out,
                    size_t cap, size_t *out_len)
{
    writer w;
    int groups; /* later groups written (ICD section 4): up to the last one given */
    if (a == NULL || out == NULL || out_len == NULL)
        return BOOM_E_ARG;
    w.p = out;
    w.n = 0;
    w.cap = cap;
    w.full = false;
    if (a->has_selected_alt_ft || a->has_selected_heading_deg || a->has_selected_mach)
        groups = 2;
    else if (a->has_pitch_rate_dps || a->has_load_factor)
        groups = 1;
    else
        groups = 0;
    /* map 16: 4 header keys + 13 fields, + 2 with the pair, + 3 more with the targets */
    w_byte(&w, 0xDE);
    w_byte(&w, 0x00);
    w_byte(&w, groups == 2 ? 22 : groups == 1 ? 19 : 17);
    w_str(&w, "v");
    w_uint(&w, BOOM_WIRE_FORMAT_VERSION);
    w_str(&w, "type");
    w_str(&w, "air");
    w_str(&w, "seq");
    w_uint(&w, seq);
    w_str(&w, "utc_s");
    w_double(&w, utc_s);
    w_str(&w, "lat_deg");
    w_double(&w, a->lat_deg);
    w_str(&w, "lon_deg");
    w_double(&w, a->lon_deg);
    w_str(&w, "alt_ft");
    w_double(&w, a->alt_ft);
    w_str(&w, "mach");
    w_double(&w, a->mach);
    w_str(&w, "heading_deg");
    w_double(&w, a->heading_deg);
    w_str(&w, "gs_kt");
    w_double(&w, a->gs_kt);
    w_str(&w, "bank_deg");
    w_double(&w, a->bank_deg);
    w_str(&w, "fpa_deg");
    w_double(&w, a->fpa_deg);
    w_str(&w, "track_deg");
    w_opt_double(&w, a->has_track_deg, a->track_deg);
    w_str(&w, "mach_rate_per_s");
    w_opt_double(&w, a->has_mach_rate_per_s, a->mach_rate_per_s);
    w_str(&w, "sat_c");
    w_opt_double(&w, a->has_sat_c, a->sat_c);
    w_str(&w, "wind_from_deg");
    w_opt_double(&w, a->has_wind_from_deg, a->wind_from_deg);
    w_str(&w, "wind_kt");
    w_opt_double(&w, a->has_wind_kt, a->wind_kt);
    if (groups >= 1) {
        w_str(&w, "pitch_rate_dps");
        w_opt_double(&w, a->has_pitch_rate_dps, a->pitch_rate_dps);
        w_str(&w, "load_factor");
        w_opt_double(&w, a->has_load_factor, a->load_factor);
    }
    if (groups >= 2) {
        w_str(&w, "selected_alt_ft");
        w_opt_double(&w, a->has_selected_alt_ft, a->selected_alt_ft);
        w_str(&w, "selected_heading_deg");
        w_opt_double(&w, a->has_selected_heading_deg, a->selected_heading_deg);
        w_str(&w, "selected_mach");
        w_opt_double(&w, a->has_selected_mach, a->selected_mach);
    }
    if (w.full)
        return BOOM_E_NO_ROOM;
    *out_len = w.n;
    return BOOM_OK;
}

/* ------------------------------------------------------- MessagePack reader */
typedef enum { K_NIL, K_BOOL, K_UINT, K_NINT, K_FLOAT, K_STR, K_BIN, K_ARRAY, K_MAP, K_EXT } kind;

typedef struct {
    kind k;
    bool b;
    uint64_t u;       /* K_UINT */
    int64_t i;        /* K_NINT (always negative) */
    double f;         /* K_FLOAT */
    const uint8_t *s; /* K_STR, K_BIN, K_EXT data */
    uint32_t len;     /* byte length, or element count for K_ARRAY / K_MAP */
} mval;

static uint64_t get_be(const uint8_t *p, int n)
{
    uint64_t v = 0;
    int i;
    for (i = 0; i < n; i++)
        v = (v << 8) | p[i];
    return v;
}

/* Strict UTF-8 (the well-formed byte sequences of the Unicode standard, table 3-7),
 * which is what Python's "strict" decoder accepts. */
static bool utf8_ok(const uint8_t *s, size_t n)
{
    size_t i = 0;
    while (i < n) {
        uint8_t c = s[i];
        size_t need, j;
        uint8_t lo = 0x80, hi = 0xBF;
        if (c < 0x80) {
            i++;
            continue;
        }
        if (c >= 0xC2 && c <= 0xDF) {
            need = 1;
        } else if (c >= 0xE0 && c <= 0xEF) {
            need = 2;
            if (c == 0xE0)
                lo = 0xA0;
            if (c == 0xED)
                hi = 0x9F;
        } else if (c >= 0xF0 && c <= 0xF4) {
            need = 3;
            if (c == 0xF0)
                lo = 0x90;
            if (c == 0xF4)
                hi = 0x8F;
        } else {
            return false;
        }
        if (n - i - 1 < need)
            return false;
        if (s[i + 1] < lo || s[i + 1] > hi)
            return false;
        for (j = 2; j <= need; j++)
            if (s[i + j] < 0x80 || s[i + j] > 0xBF)
                return false;
        i += need + 1;
    }
    return true;
}

/* Read the head of one value at *pp; scalars, strings, bin and ext are consumed whole,
 * arrays and maps only their header. Returns false when malformed. */
static bool read_head(const uint8_t **pp, const uint8_t *end, mval *v)
{
    const uint8_t *p = *pp;
    size_t avail;
    uint8_t c;
    int w = 0;
    uint64_t n = 0;
    if (p >= end)
        return false;
    c = *p++;
    avail = (size_t)(end - p);
    memset(v, 0, sizeof *v);
    if (c <= 0x7F) {
        v->k = K_UINT;
        v->u = c;
    } else if (c <= 0x8F) {
        v->k = K_MAP;
        v->len = c & 0x0Fu;
    } else if (c <= 0x9F) {
        v->k = K_ARRAY;
        v->len = c & 0x0Fu;
    } else if (c <= 0xBF) {
        v->k = K_STR;
        n = c & 0x1Fu;
        goto data;
    } else if (c >= 0xE0) {
        v->k = K_NINT;
        v->i = (int64_t)(int8_t)c;
    } else {
        switch (c) {
        case 0xC0: v->k = K_NIL; break;
        case 0xC2: v->k = K_BOOL; v->b = false; break;
        case 0xC3: v->k = K_BOOL; v->b = true; break;
        case 0xC4: case 0xC5: case 0xC6:
            v->k = K_BIN;
            w = 1 << (c - 0xC4);
            goto sized;
        case 0xD9: case 0xDA: case 0xDB:
            v->k = K_STR;
            w = 1 << (c - 0xD9);
            goto sized;
        case 0xC7: case 0xC8: case 0xC9:
            v->k = K_EXT;
            w = 1 << (c - 0xC7);
            if (avail < (size_t)w + 1u)
                return false;
            n = get_be(p, w);
            p += w;
            avail -= (size_t)w;
            goto ext;
        case 0xD4: case 0xD5: case 0xD6: case 0xD7: case 0xD8:
            v->k = K_EXT;
            n = 1u << (c - 0xD4);
            goto ext;
        case 0xCA: {
            uint32_t bits;
            float f;
            if (avail < 4)
                return false;
            bits = (uint32_t)get_be(p, 4);
            memcpy(&f, &bits, sizeof f);
            v->k = K_FLOAT;
            v->f = (double)f;
            p += 4;
            break;
        }
        case 0xCB: {
            uint64_t bits;
            if (avail < 8)
                return false;
            bits = get_be(p, 8);
            memcpy(&v->f, &bits, sizeof bits);
            v->k = K_FLOAT;
            p += 8;
            break;
        }
        case 0xCC: case 0xCD: case 0xCE: case 0xCF:
            w = 1 << (c - 0xCC);
            if (avail < (size_t)w)
                return false;
            v->k = K_UINT;
            v->u = get_be(p, w);
            p += w;
            break;
        case 0xD0: case 0xD1: case 0xD2: case 0xD3: {
            uint64_t raw;
            int64_t s;
            w = 1 << (c - 0xD0);
            if (avail < (size_t)w)
                return false;
            raw = get_be(p, w);
            p += w;
            if (w < 8 && (raw >> (8 * w - 1)) & 1u)
                raw |= ~(uint64_t)0 << (8 * w); /* sign-extend */
            memcpy(&s, &raw, sizeof s);
            if (s < 0) {
                v->k = K_NINT;
                v->i = s;
            } else {
                v->k = K_UINT;
                v->u = (uint64_t)s;
            }
            break;
        }
        case 0xDC: case 0xDD:
            w = (c == 0xDC) ? 2 : 4;
            if (avail < (size_t)w)
                return false;
            v->k = K_ARRAY;
            v->len = (uint32_t)get_be(p, w);
            p += w;
            break;
        case 0xDE: case 0xDF:
            w = (c == 0xDE) ? 2 : 4;
            if (avail < (size_t)w)
                return false;
            v->k = K_MAP;
            v->len = (uint32_t)get_be(p, w);
            p += w;
            break;
        default: /* 0xC1 is never used */
            return false;
        }
        *pp = p;
        return true;
    }
    *pp = p;
    return true;

sized:
    if (avail < (size_t)w)
        return false;
    n = get_be(p, w);
    p += w;
    avail -= (size_t)w;
data:
    if (n > avail)
        return false;
    if (v->k == K_STR && !utf8_ok(p, (size_t)n))
        return false;
    v->s = p;
    v->len = (uint32_t)n;
    *pp = p + n;
    return true;

ext: {
    int8_t type;
    if (avail < 1)
        return false;
    type = (int8_t)*p++;
    avail--;
    if (n > avail)
        return false;
    if (type == -1) { /* timestamp: Python rejects other lengths and nanoseconds > 1e9-1 */
        if (n == 8) {
            if ((get_be(p, 8) >> 34) > 999999999u)
                return false;
        } else if (n == 12) {
            if (get_be(p, 4) > 999999999u)
                return false;
        } else if (n != 4) {
            return false;
        }
    }
    v->s = p;
    v->len = (uint32_t)n;
    *pp = p + n;
    return true;
}
}

/* Walk exactly one value (containers included), validating everything the Python
 * unpacker checks plus the nesting limit. Iterative: a stack of remaining counts. */
static bool walk(const uint8_t **pp, const uint8_t *end)
{
    uint64_t remaining[BOOM_MAX_DEPTH];
    bool is_map[BOOM_MAX_DEPTH];
    int depth = 0;
    const uint8_t *p = *pp;
    for (;;) {
        mval v;
        bool key = depth > 0 && is_map[depth - 1] && (remaining[depth - 1] % 2u == 0u);
        if (!read_head(&p, end, &v))
            return false;
        if (key && v.k != K_STR && v.k != K_BIN)
            return false; /* Python's strict_map_key: keys are str or bin */
        if (depth > 0)
            remaining[depth - 1]--;
        if (v.k == K_ARRAY || v.k == K_MAP) {
            uint64_t items = (v.k == K_MAP) ? 2u * (uint64_t)v.len : v.len;
            if (depth == BOOM_MAX_DEPTH)
                return false;
            if (items > (uint64_t)(end - p))
                return false; /* cannot fit: each item takes at least one byte */
            if (items > 0) {
                remaining[depth] = items;
                is_map[depth] = (v.k == K_MAP);
                depth++;
            }
        }
        while (depth > 0 && remaining[depth - 1] == 0)
            depth--;
        if (depth == 0)
            break;
    }
    *pp = p;
    return true;
}

/* Known top-level keys of all frame types. */
enum {
    KEY_V, KEY_TYPE, KEY_SEQ, KEY_UTC,
    KEY_LAT, KEY_LON, KEY_ALT, KEY_MACH, KEY_HDG, KEY_GS, KEY_BANK, KEY_FPA,
    KEY_TRACK, KEY_MRATE, KEY_SAT, KEY_WFROM, KEY_WKT,
    KEY_PITCH, KEY_LOAD, KEY_SELALT, KEY_SELHDG, KEY_SELMACH,
    KEY_STATUS, KEY_ZONE, KEY_TTC, KEY_OP, KEY_FOCUS, KEY_MAXM, KEY_TL, KEY_TR,
    KEY_STALE, KEY_CUE, KEY_ACTBY, KEY_RMACH, KEY_TLH, KEY_TRH, KEY_COMB, KEY_NEAR,
    KEY_PROB, KEY_ATLIM, KEY_LEVEL,
    KEY_STATE, KEY_REASON, KEY_COUNTERS,
    N_KEYS
};

static const char *const key_names[N_KEYS] = {
    "v", "type", "seq", "utc_s",
    "lat_deg", "lon_deg", "alt_ft", "mach", "heading_deg", "gs_kt", "bank_deg", "fpa_deg",
    "track_deg", "mach_rate_per_s", "sat_c", "wind_from_deg", "wind_kt",
    "pitch_rate_dps", "load_factor", "selected_alt_ft", "selected_heading_deg",
    "selected_mach",
    "status", "zone_id", "time_to_contact_s", "overpressure_psf", "focus",
    "max_mach_off_ground", "turn_left_deg", "turn_right_deg", "tables_stale", "cue",
    "act_by_s", "resolve_mach", "turn_left_hdg", "turn_right_hdg", "combined",
    "near_cutoff", "boom_probability", "at_limit", "level_off",
    "state", "reason", "counters",
};

static bool str_is(const mval *v, const char *s)
{
    size_t n = strlen(s);
    return v->k == K_STR && v->len == n && memcmp(v->s, s, n) == 0;
}

typedef struct {
    const uint8_t *pos[N_KEYS]; /* value of the last occurrence, or NULL */
    const uint8_t *end;
} keymap;

static void value_at(const keymap *km, int key, mval *v)
{
    const uint8_t *p = km->pos[key];
    (void)read_head(&p, km->end, v); /* already validated */
}

/* A number field. Required: missing -> missing_field, nil -> bad_type. */
static int get_number(const keymap *km, int key, bool required, bool *has, double *out)
{
    mval v;
    if (km->pos[key] == NULL) {
        if (required)
            return BOOM_E_MISSING_FIELD;
        *has = false;
        *out = 0.0;
        return BOOM_OK;
    }
    value_at(km, key, &v);
    switch (v.k) {
    case K_FLOAT: *out = v.f; break;
    case K_UINT: *out = (double)v.u; break;
    case K_NINT: *out = (double)v.i; break;
    case K_NIL:
        if (required)
            return BOOM_E_BAD_TYPE;
        *has = false;
        *out = 0.0;
        return BOOM_OK;
    default: return BOOM_E_BAD_TYPE;
    }
    if (has != NULL)
        *has = true;
    return BOOM_OK;
}

static int get_bool(const keymap *km, int key, bool *out)
{
    mval v;
    if (km->pos[key] == NULL)
        return BOOM_E_MISSING_FIELD;
    value_at(km, key, &v);
    if (v.k != K_BOOL)
        return BOOM_E_BAD_TYPE;
    *out = v.b;
    return BOOM_OK;
}

/* Text checks shared with counter names: at most max bytes, no NUL. */
static int check_text(const mval *v, size_t max)
{
    if (v->k != K_STR)
        return BOOM_E_BAD_TYPE;
    if (v->len > max || memchr(v->s, 0, v->len) != NULL)
        return BOOM_E_BAD_VALUE;
    return BOOM_OK;
}

static void copy_text(char *dst, const mval *v)
{
    memcpy(dst, v->s, v->len);
    dst[v->len] = '\0';
}

/* A string field; nullable: missing or nil -> *has = false. */
static int get_text(const keymap *km, int key, bool nullable, size_t max, char *dst, bool *has)
{
    mval v;
    int r;
    if (km->pos[key] == NULL) {
        if (!nullable)
            return BOOM_E_MISSING_FIELD;
        *has = false;
        dst[0] = '\0';
        return BOOM_OK;
    }
    value_at(km, key, &v);
    if (nullable && v.k == K_NIL) {
        *has = false;
        dst[0] = '\0';
        return BOOM_OK;
    }
    r = check_text(&v, max);
    if (r != BOOM_OK)
        return r;
    copy_text(dst, &v);
    if (has != NULL)
        *has = true;
    return BOOM_OK;
}

/* A string field that must be one of names[0..n): missing, bad_type, else bad_value. */
static int get_enum(const keymap *km, int key, const char *const *names, int n, int *out)
{
    mval v;
    int i;
    if (km->pos[key] == NULL)
        return BOOM_E_MISSING_FIELD;
    value_at(km, key, &v);
    if (v.k != K_STR)
        return BOOM_E_BAD_TYPE;
    for (i = 0; i < n; i++) {
        if (str_is(&v, names[i])) {
            *out = i;
            return BOOM_OK;
        }
    }
    return BOOM_E_BAD_VALUE;
}

static int decode_air(const keymap *km, boom_air *a)
{
    int r;
    boom_air_init(a);
#define REQ(key, field) \
    if ((r = get_number(km, key, true, NULL, &a->field)) != BOOM_OK) return r
#define OPT(key, field) \
    if ((r = get_number(km, key, false, &a->has_##field, &a->field)) != BOOM_OK) return r
    REQ(KEY_LAT, lat_deg);
    REQ(KEY_LON, lon_deg);
    REQ(KEY_ALT, alt_ft);
    REQ(KEY_MACH, mach);
    REQ(KEY_HDG, heading_deg);
    REQ(KEY_GS, gs_kt);
    REQ(KEY_BANK, bank_deg);
    REQ(KEY_FPA, fpa_deg);
    OPT(KEY_TRACK, track_deg);
    OPT(KEY_MRATE, mach_rate_per_s);
    OPT(KEY_SAT, sat_c);
    OPT(KEY_WFROM, wind_from_deg);
    OPT(KEY_WKT, wind_kt);
    OPT(KEY_PITCH, pitch_rate_dps);
    OPT(KEY_LOAD, load_factor);
    OPT(KEY_SELALT, selected_alt_ft);
    OPT(KEY_SELHDG, selected_heading_deg);
    OPT(KEY_SELMACH, selected_mach);
    return BOOM_OK;
}

static int decode_adv(const keymap *km, boom_adv *a, unsigned version)
{
    int r, status = 0;
    memset(a, 0, sizeof *a);
    if ((r = get_enum(km, KEY_STATUS, adv_status_names, version >= 2u ? 7 : 6, &status)))
        return r;
    a->status = (boom_adv_status)status;
    if ((r = get_text(km, KEY_ZONE, true, BOOM_ZONE_ID_MAX, a->zone_id, &a->has_zone_id)))
        return r;
    OPT(KEY_TTC, time_to_contact_s);
    OPT(KEY_OP, overpressure_psf);
    if ((r = get_bool(km, KEY_FOCUS, &a->focus)) != BOOM_OK)
        return r;
    OPT(KEY_MAXM, max_mach_off_ground);
    OPT(KEY_TL, turn_left_deg);
    OPT(KEY_TR, turn_right_deg);
    if ((r = get_bool(km, KEY_STALE, &a->tables_stale)) != BOOM_OK)
        return r;
    if ((r = get_text(km, KEY_CUE, false, BOOM_CUE_MAX, a->cue, NULL)) != BOOM_OK)
        return r;
    OPT(KEY_ACTBY, act_by_s);
    OPT(KEY_RMACH, resolve_mach);
    OPT(KEY_TLH, turn_left_hdg);
    OPT(KEY_TRH, turn_right_hdg);
    if (km->pos[KEY_COMB] != NULL
        && (r = get_bool(km, KEY_COMB, &a->combined)) != BOOM_OK)
        return r; /* optional: absent means false */
    if (km->pos[KEY_NEAR] != NULL /* optional (issue 14, sent only when true) */
        && (r = get_bool(km, KEY_NEAR, &a->near_cutoff)) != BOOM_OK)
        return r;
    OPT(KEY_PROB, boom_probability); /* optional (issue 16, sent only when known) */
    if (km->pos[KEY_ATLIM] != NULL /* optional (sent only when true) */
        && (r = get_bool(km, KEY_ATLIM, &a->at_limit)) != BOOM_OK)
        return r;
    if (km->pos[KEY_LEVEL] != NULL /* optional (sent only when true) */
        && (r = get_bool(km, KEY_LEVEL, &a->level_off)) != BOOM_OK)
        return r;
    return BOOM_OK;
#undef REQ
#undef OPT
}

typedef struct {
    mval key;
    const uint8_t *value;
} counter_entry;

static bool same_key(const mval *a, const mval *b)
{
    return a->k == b->k && a->len == b->len && memcmp(a->s, b->s, a->len) == 0;
}

static int decode_status(const keymap *km, boom_status *s)
{
    counter_entry ent[BOOM_MAX_COUNTERS];
    size_t n = 0, i, j;
    int r, state = 0;
    mval v;
    const uint8_t *p;
    memset(s, 0, sizeof *s);
    if ((r = get_enum(km, KEY_STATE, state_names, 3, &state)) != BOOM_OK)
        return r;
    s->state = (boom_state)state;
    if ((r = get_text(km, KEY_REASON, false, BOOM_REASON_MAX, s->reason, NULL)) != BOOM_OK)
        return r;
    if (km->pos[KEY_COUNTERS] == NULL)
        return BOOM_E_MISSING_FIELD;
    p = km->pos[KEY_COUNTERS];
    (void)read_head(&p, km->end, &v);
    if (v.k != K_MAP)
        return BOOM_E_BAD_TYPE;
    /* unique keys in first-appearance order, each with its last value (Python dict) */
    for (i = 0; i < v.len; i++) {
        mval key;
        const uint8_t *val;
        (void)read_head(&p, km->end, &key);
        val = p;
        (void)walk(&p, km->end);
        for (j = 0; j < n; j++)
            if (same_key(&ent[j].key, &key))
                break;
        if (j < n) {
            ent[j].value = val;
        } else {
            if (n == BOOM_MAX_COUNTERS)
                return BOOM_E_BAD_VALUE; /* more than BOOM_MAX_COUNTERS */
            ent[n].key = key;
            ent[n].value = val;
            n++;
        }
    }
    for (i = 0; i < n; i++) {
        mval cv;
        const uint8_t *q = ent[i].value;
        if (ent[i].key.k != K_STR)
            return BOOM_E_BAD_TYPE;
        if ((r = check_text(&ent[i].key, BOOM_COUNTER_NAME_MAX)) != BOOM_OK)
            return r;
        if (ent[i].key.len == 0)
            return BOOM_E_BAD_VALUE;
        (void)read_head(&q, km->end, &cv);
        if (cv.k == K_NINT)
            return BOOM_E_BAD_VALUE;
        if (cv.k != K_UINT)
            return BOOM_E_BAD_TYPE;
        copy_text(s->counters[i].name, &ent[i].key);
        s->counters[i].value = cv.u;
    }
    s->n_counters = n;
    return BOOM_OK;
}

int boom_decode_frame(const uint8_t *payload, size_t len, boom_frame *out)
{
    const uint8_t *p, *end;
    keymap km;
    mval v;
    uint32_t i;
    int k, r;
    double utc;
    if ((payload == NULL && len > 0) || out == NULL)
        return BOOM_E_ARG;
    if (len > BOOM_MAX_PAYLOAD)
        return BOOM_E_OVERSIZE;
    end = payload + len;
    p = payload;
    if (!walk(&p, end) || p != end)
        return BOOM_E_MALFORMED;
    p = payload;
    (void)read_head(&p, end, &v);
    if (v.k != K_MAP)
        return BOOM_E_NOT_A_MAP;
    memset(&km, 0, sizeof km);
    km.end = end;
    for (i = 0; i < v.len; i++) {
        mval key;
        const uint8_t *val;
        (void)read_head(&p, end, &key);
        val = p;
        (void)walk(&p, end);
        if (key.k != K_STR)
            continue; /* bin keys are never known keys */
        for (k = 0; k < N_KEYS; k++) {
            if (str_is(&key, key_names[k])) {
                km.pos[k] = val; /* last occurrence wins */
                break;
            }
        }
    }
    memset(out, 0, sizeof *out);
    /* v */
    if (km.pos[KEY_V] == NULL)
        return BOOM_E_MISSING_FIELD;
    value_at(&km, KEY_V, &v);
    if (v.k != K_UINT && v.k != K_NINT)
        return BOOM_E_BAD_TYPE;
    if (v.k != K_UINT || v.u < 1u || v.u > BOOM_ADV_FORMAT_VERSION)
        return BOOM_E_UNSUPPORTED_VERSION;
    out->version = (unsigned)v.u;
    /* type */
    if (km.pos[KEY_TYPE] == NULL)
        return BOOM_E_MISSING_FIELD;
    value_at(&km, KEY_TYPE, &v);
    if (v.k != K_STR)
        return BOOM_E_BAD_TYPE;
    if (str_is(&v, "air"))
        out->type = BOOM_FRAME_AIR;
    else if (str_is(&v, "adv"))
        out->type = BOOM_FRAME_ADV;
    else if (str_is(&v, "status"))
        out->type = BOOM_FRAME_STATUS;
    else
        return BOOM_E_UNKNOWN_TYPE;
    if (out->type != BOOM_FRAME_ADV && out->version != BOOM_WIRE_FORMAT_VERSION)
        return BOOM_E_UNSUPPORTED_VERSION; /* version 2 is an advisory-frame version */
    /* seq */
    if (km.pos[KEY_SEQ] == NULL)
        return BOOM_E_MISSING_FIELD;
    value_at(&km, KEY_SEQ, &v);
    if (v.k != K_UINT && v.k != K_NINT)
        return BOOM_E_BAD_TYPE;
    if (v.k == K_NINT || v.u > 0xFFFFFFFFu)
        return BOOM_E_BAD_VALUE;
    out->seq = (uint32_t)v.u;
    /* utc_s */
    if ((r = get_number(&km, KEY_UTC, true, NULL, &utc)) != BOOM_OK)
        return r;
    out->utc_s = utc;
    switch (out->type) {
    case BOOM_FRAME_AIR: return decode_air(&km, &out->u.air);
    case BOOM_FRAME_ADV: return decode_adv(&km, &out->u.adv, out->version);
    default: return decode_status(&km, &out->u.status);
    }
}
