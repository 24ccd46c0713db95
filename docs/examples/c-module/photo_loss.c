/*
 * photo_loss.c: a complete exobound process module (ABI v1) in plain C.
 *
 * Why this exists: the ABI in docs/abi.md is small enough to implement
 * without the Rust SDK, and this file proves it. It is a Loss module for
 * photoionization: an atom in sunlight at 1 AU is ionized at `rate_1au`
 * (s^-1); the rate scales with the inverse square of the heliocentric
 * distance r (AU), and an atom that spends only part of the interval in
 * sunlight is ionized for that part only:
 *
 *     rate = rate_1au / r^2 * sunlit_fraction        [s^-1]
 *
 * Everything a module needs is here, with no C library: a bump allocator
 * over linear memory, the two custom sections (ABI version and
 * MessagePack manifest, written as top-level assembly), a parameter reader for the MessagePack map that
 * exobound_init receives, the error-message buffer behind
 * exobound_last_error, and the batch export exobound_loss_rate.
 *
 * Build (see README.md in this folder):
 *     clang --target=wasm32 -nostdlib -ffreestanding -O2 \
 *           -Wl,--no-entry -o photo_loss.wasm photo_loss.c
 * The exports are named with export_name attributes, so no --export
 * flags are needed; the linker adds `memory`.
 */

#include <stddef.h>
#include <stdint.h>

#define EXPORT(name) __attribute__((export_name(name)))

/* -------------------------------------------------------------------------
 * Custom sections
 *
 * A custom section must hold bytes, not a data segment: clang (checked
 * with clang 14 and 19) turns a C object declared with
 * __attribute__((section(".custom_section.NAME"))) into an ordinary data
 * segment, so the loader would find no section. The assembler, on the
 * other hand, makes a custom section NAME of a section named
 * ".custom_section.NAME", and wasm-ld keeps it. So both sections are
 * written as top-level assembly; ".text" switches back to code afterwards.
 *
 * MP_BYTES emits raw bytes, MP_TEXT the bytes of a string (which must not
 * contain a double quote or a backslash), MP_STR a header byte then text.
 * ---------------------------------------------------------------------- */

#define MP_BYTES(...) ".byte " #__VA_ARGS__ "\n"
#define MP_TEXT(text) ".ascii \"" text "\"\n"
#define MP_STR(header, text) MP_BYTES(header) MP_TEXT(text)

/* ASCII "1.0.0", no terminating NUL. */
__asm__(".section \".custom_section.exobound:abi\",\"\",@\n"
        MP_TEXT("1.0.0")
        ".text\n");

/*
 * The manifest, hand-written MessagePack (docs/abi.md, "The manifest"):
 * one MessagePack item per line, a header then its payload.
 *   0x80|n  map of n pairs          0x90|n  array of n items
 *   0xa0|n  string of n <= 31 bytes  0xd9 n  string of n <= 255 bytes
 *   0xcb    float64, 8 bytes big-endian      0xc0  nil
 * check_module.py in this folder decodes it back and checks every key.
 */
__asm__(".section \".custom_section.exobound:manifest\",\"\",@\n"
    MP_BYTES(0x8d) /* map of 13: the manifest */
    MP_STR(0xa4, "name")
    MP_STR(0xac, "photo-loss-c")
    MP_STR(0xa7, "version")
    MP_STR(0xa5, "1.0.0")
    MP_STR(0xab, "description")
    MP_BYTES(0xd9, 0x97) /* str8 of 151 bytes */
        MP_TEXT("Photoionization loss written in C: a rate at 1 AU scaled by ")
        MP_TEXT("the inverse square of the heliocentric distance and by the ")
        MP_TEXT("sunlit fraction of the interval.")
    MP_STR(0xa5, "roles")
    MP_BYTES(0x91) /* array of 1 */
    MP_STR(0xa4, "loss")
    MP_STR(0xa7, "authors")
    MP_BYTES(0x91) /* array of 1 */
    MP_STR(0xb3, "exobound developers")
    MP_STR(0xab, "institution")
    MP_STR(0xb0, "exobound project")
    MP_STR(0xa7, "licence")
    MP_STR(0xaa, "Apache-2.0")
    MP_STR(0xaa, "law_source")
    MP_BYTES(0xd9, 0x3f) /* str8 of 63 bytes */
        MP_TEXT("inverse-square scaling of a photoionization rate quoted at ")
        MP_TEXT("1 AU")
    MP_STR(0xa8, "draws_on")
    MP_BYTES(0xc0) /* nil: only a source draws on a pool */
    MP_STR(0xac, "ledger_label")
    MP_STR(0xac, "photoionized")
    MP_STR(0xa6, "inputs")
    MP_BYTES(0x92) /* array of 2 */
    MP_STR(0xae, "helio-distance")
    MP_STR(0xa8, "sunlight")
    MP_STR(0xaa, "parameters")
    MP_BYTES(0x91) /* array of 1 */
    MP_BYTES(0x88) /* map of 8: the parameter rate_1au */
    MP_STR(0xa4, "name")
    MP_STR(0xa8, "rate_1au")
    MP_STR(0xa4, "unit")
    MP_STR(0xa4, "s^-1")
    MP_STR(0xab, "description")
    MP_BYTES(0xd9, 0x2f) /* str8 of 47 bytes */
        MP_TEXT("photoionization rate of one sunlit atom at 1 AU")
    MP_STR(0xa7, "default")
    MP_BYTES(0xcb, 0x3e, 0xd8, 0xbf, 0x13, 0xa6, 0xa5, 0xf1, 0x97) /* 5.9e-6 s^-1 */
    MP_STR(0xa3, "min")
    MP_BYTES(0xcb, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00) /* 0 s^-1 */
    MP_STR(0xa3, "max")
    MP_BYTES(0xcb, 0x3f, 0x50, 0x62, 0x4d, 0xd2, 0xf1, 0xa9, 0xfc) /* 1e-3 s^-1 */
    MP_STR(0xa7, "choices")
    MP_BYTES(0x90) /* array of 0: a number, not a choice */
    MP_STR(0xae, "default_origin")
    MP_BYTES(0xd9, 0x38) /* str8 of 56 bytes */
        MP_TEXT("from memory: Huebner, Keady & Lyon (1992), Na, quiet Sun")
    MP_STR(0xb0, "reference_points")
    MP_BYTES(0x91) /* array of 1 */
    MP_BYTES(0x87) /* map of 7: one reference point */
    MP_STR(0xab, "description")
    MP_STR(0xbe, "half-sunlit interval at 0.5 AU")
    MP_STR(0xa5, "check")
    MP_STR(0xa9, "loss-rate")
    MP_STR(0xaa, "parameters")
    MP_BYTES(0x91) /* array of 1 pair */
    MP_BYTES(0x92) /* pair: name, value */
    MP_STR(0xa8, "rate_1au")
    MP_BYTES(0xcb, 0x3e, 0xe4, 0xf8, 0xb5, 0x88, 0xe3, 0x68, 0xf1) /* 1e-5 s^-1 */
    MP_STR(0xa5, "input")
    MP_BYTES(0x92) /* array of 2 pairs */
    MP_BYTES(0x92) /* pair: field, value */
    MP_STR(0xae, "helio_distance")
    MP_BYTES(0xcb, 0x3f, 0xe0, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00) /* 0.5 AU */
    MP_BYTES(0x92) /* pair: field, value */
    MP_STR(0xaf, "sunlit_fraction")
    MP_BYTES(0xcb, 0x3f, 0xe0, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00) /* 0.5 */
    MP_STR(0xa8, "expected")
    MP_BYTES(0xcb, 0x3e, 0xf4, 0xf8, 0xb5, 0x88, 0xe3, 0x68, 0xf1) /* 2e-5 s^-1 */
    MP_STR(0xa9, "tolerance")
    MP_BYTES(0xcb, 0x3d, 0x71, 0x97, 0x99, 0x81, 0x2d, 0xea, 0x11) /* 1e-12 */
    MP_STR(0xa6, "source")
    MP_STR(0xbc, "arithmetic of the law itself")
    ".text\n");

/* -------------------------------------------------------------------------
 * Records (docs/abi.md, "Records"): wasm32 aligns uint64_t and double to
 * 8 bytes, as the Rust SDK's repr(C) structs do, so these match byte for
 * byte. The assertions pin the offsets of the ABI tables.
 * ---------------------------------------------------------------------- */

typedef struct {
    uint64_t seed;     /* run seed, dimensionless */
    uint64_t particle; /* particle id, dimensionless */
    uint32_t event;    /* event counter, dimensionless */
    uint32_t stream;   /* named stream (low 8 bits) */
} RngKey;

typedef struct {
    RngKey key;                 /*  0: random stream for stochastic losses */
    double altitude;            /* 24: above the mean radius, m */
    double latitude;            /* 32: rad */
    double local_time;          /* 40: hours, 12 = subsolar meridian */
    double speed;               /* 48: relative to the body, m s^-1 */
    double sun_radial_velocity; /* 56: away from the Sun > 0, m s^-1 */
    double helio_distance;      /* 64: AU */
    double sunlit_fraction;     /* 72: of the interval, in [0, 1] */
    double time;                /* 80: simulated time, s */
} InFlight;

_Static_assert(sizeof(RngKey) == 24, "RngKey is 24 bytes in ABI v1");
_Static_assert(sizeof(InFlight) == 88, "InFlight is 88 bytes in ABI v1");
_Static_assert(offsetof(InFlight, helio_distance) == 64, "InFlight.helio_distance");
_Static_assert(offsetof(InFlight, sunlit_fraction) == 72, "InFlight.sunlit_fraction");
_Static_assert(_Alignof(InFlight) == 8, "records are 8-byte aligned");

/* Domain error codes of ABI v1; a call returns the negated code. */
enum {
    ERR_INVALID_PARAMETER = 1,
    ERR_OUTSIDE_VALIDITY = 2,
    ERR_INVALID_INPUT = 3,
    ERR_NOT_INITIALISED = 4,
    ERR_UNSUPPORTED = 5,
    ERR_LAW = 6,
};

/* -------------------------------------------------------------------------
 * Bump allocator
 *
 * The host calls exobound_alloc a handful of times per instance (the
 * parameter bytes, one input and one output buffer, a message buffer) and
 * only grows them, so a bump allocator is enough. Freeing the most recent
 * block gives its bytes back, which is what happens when the host replaces
 * a buffer by a larger one. Memory starts at __heap_base, which wasm-ld
 * places after the static data and the stack.
 * ---------------------------------------------------------------------- */

extern unsigned char __heap_base;
static uint32_t heap_top; /* first free byte; 0 until the first call */

#define WASM_PAGE 65536u /* bytes per WebAssembly page */

EXPORT("exobound_alloc")
uint32_t exobound_alloc(uint32_t size, uint32_t align) {
    if (heap_top == 0) heap_top = (uint32_t)(uintptr_t)&__heap_base;
    if (align == 0) align = 1;
    if ((align & (align - 1)) != 0) return 0; /* not a power of two */
    if (size == 0) size = 1;
    uint64_t start = ((uint64_t)heap_top + align - 1) & ~(uint64_t)(align - 1);
    uint64_t end = start + size;
    uint64_t have = (uint64_t)__builtin_wasm_memory_size(0) * WASM_PAGE;
    if (end > have) {
        uint64_t pages = (end - have + WASM_PAGE - 1) / WASM_PAGE;
        if (pages > 65536u) return 0;
        if (__builtin_wasm_memory_grow(0, (size_t)pages) == (size_t)-1) return 0;
    }
    heap_top = (uint32_t)end;
    return (uint32_t)start;
}

EXPORT("exobound_free")
void exobound_free(uint32_t ptr, uint32_t size, uint32_t align) {
    (void)align;
    if (size == 0) size = 1;
    if (ptr != 0 && ptr + size == heap_top) heap_top = ptr;
}

/* -------------------------------------------------------------------------
 * The last error message, kept for exobound_last_error (UTF-8, no NUL).
 * ---------------------------------------------------------------------- */

static char message[512];
static uint32_t message_len;

static void msg_clear(void) { message_len = 0; }

static void msg_bytes(const char *s, uint32_t n) {
    for (uint32_t i = 0; i < n && message_len < sizeof message; i++) message[message_len++] = s[i];
}

static void msg_str(const char *s) {
    uint32_t n = 0;
    while (s[n] != 0) n++;
    msg_bytes(s, n);
}

static void msg_uint(uint64_t v) {
    char digits[20];
    int k = 0;
    do {
        digits[k++] = (char)('0' + v % 10);
        v /= 10;
    } while (v != 0);
    while (k > 0) msg_bytes(&digits[--k], 1);
}

/* A number in scientific notation with 6 significant digits, e.g. 5.9e-06;
 * good enough for messages (it is not a correctly rounded conversion). */
static void msg_double(double x) {
    if (x != x) { msg_str("NaN"); return; }
    if (x < 0) { msg_str("-"); x = -x; }
    if (x == __builtin_inf()) { msg_str("inf"); return; }
    if (x == 0) { msg_str("0"); return; }
    int exp10 = 0;
    while (x >= 10.0) { x /= 10.0; exp10++; }
    while (x < 1.0) { x *= 10.0; exp10--; }
    uint64_t m = (uint64_t)(x * 100000.0 + 0.5); /* 6 digits: d.ddddd */
    if (m >= 1000000) { m /= 10; exp10++; }
    char d[6];
    for (int i = 5; i >= 0; i--) { d[i] = (char)('0' + m % 10); m /= 10; }
    int last = 5;
    while (last > 0 && d[last] == '0') last--;
    msg_bytes(d, 1);
    if (last > 0) { msg_str("."); msg_bytes(d + 1, (uint32_t)last); }
    if (exp10 != 0) {
        msg_str(exp10 < 0 ? "e-" : "e+");
        uint32_t e = (uint32_t)(exp10 < 0 ? -exp10 : exp10);
        if (e < 10) msg_str("0");
        msg_uint(e);
    }
}

/* Record the message already built and return the negated code. */
static int32_t fail(int code) { return -code; }

EXPORT("exobound_last_error")
uint32_t exobound_last_error(char *buf, uint32_t cap) {
    uint32_t k = message_len < cap ? message_len : cap;
    for (uint32_t i = 0; i < k; i++) buf[i] = message[i];
    return message_len; /* the full length, even when cap is smaller */
}

/* -------------------------------------------------------------------------
 * Parameters: a MessagePack map of name to value (docs/abi.md,
 * "Parameters"). The schema has one entry, rate_1au, a number in s^-1 in
 * [0, 1e-3] with the default 5.9e-6. Its validation repeats the host's, so
 * the module never trusts its caller.
 * ---------------------------------------------------------------------- */

#define RATE_DEFAULT 5.9e-6 /* s^-1, see the manifest's default_origin */
#define RATE_MIN 0.0        /* s^-1 */
#define RATE_MAX 1e-3       /* s^-1 */

static int initialised;   /* 1 after a successful exobound_init */
static double rate_1au;   /* s^-1 */

typedef struct {
    const uint8_t *p; /* next unread byte */
    uint32_t left;    /* bytes left */
} Reader;

static int take(Reader *r, uint32_t n, uint64_t *v) {
    if (r->left < n) return 0;
    uint64_t x = 0;
    for (uint32_t i = 0; i < n; i++) x = (x << 8) | r->p[i];
    r->p += n;
    r->left -= n;
    *v = x;
    return 1;
}

/* Read a string header and point at its bytes; 0 if the item is not a string. */
static int read_str(Reader *r, const uint8_t **s, uint32_t *n) {
    uint64_t tag, len;
    if (!take(r, 1, &tag)) return 0;
    if ((tag & 0xe0) == 0xa0) len = tag & 0x1f;
    else if (tag == 0xd9) { if (!take(r, 1, &len)) return 0; }
    else if (tag == 0xda) { if (!take(r, 2, &len)) return 0; }
    else if (tag == 0xdb) { if (!take(r, 4, &len)) return 0; }
    else { r->p--; r->left++; return 0; } /* leave the byte for the caller */
    if (r->left < len) return 0;
    *s = r->p;
    *n = (uint32_t)len;
    r->p += len;
    r->left -= (uint32_t)len;
    return 1;
}

/* A MessagePack number as a double: float64, float32 or an integer. */
static int read_number(Reader *r, double *x) {
    uint64_t tag, v;
    if (!take(r, 1, &tag)) return 0;
    if (tag == 0xcb) {
        if (!take(r, 8, &v)) return 0;
        union { uint64_t u; double d; } bits = { v };
        *x = bits.d;
    } else if (tag == 0xca) {
        if (!take(r, 4, &v)) return 0;
        union { uint32_t u; float f; } bits = { (uint32_t)v };
        *x = bits.f;
    } else if (tag <= 0x7f) {
        *x = (double)tag; /* positive fixint */
    } else if (tag >= 0xe0) {
        *x = (double)((int32_t)tag - 256); /* negative fixint */
    } else if (tag >= 0xcc && tag <= 0xcf) {
        if (!take(r, 1u << (tag - 0xcc), &v)) return 0;
        *x = (double)v;
    } else if (tag >= 0xd0 && tag <= 0xd3) {
        uint32_t n = 1u << (tag - 0xd0);
        if (!take(r, n, &v)) return 0;
        int64_t s = (int64_t)(v << (64 - 8 * n)) >> (64 - 8 * n); /* sign-extend */
        *x = (double)s;
    } else {
        r->p--; r->left++;
        return 0;
    }
    return 1;
}

static int32_t bad_params(const char *what) {
    msg_clear();
    msg_str("parameters are not a MessagePack map of name to number or text: ");
    msg_str(what);
    return fail(ERR_INVALID_PARAMETER);
}

EXPORT("exobound_init")
int32_t exobound_init(const uint8_t *params, uint32_t len) {
    initialised = 0;
    double rate = RATE_DEFAULT;
    if (len > 0) {
        Reader r = { params, len };
        uint64_t tag, pairs;
        if (!take(&r, 1, &tag)) return bad_params("empty");
        if ((tag & 0xf0) == 0x80) pairs = tag & 0x0f;
        else if (tag == 0xde) { if (!take(&r, 2, &pairs)) return bad_params("truncated map"); }
        else if (tag == 0xdf) { if (!take(&r, 4, &pairs)) return bad_params("truncated map"); }
        else return bad_params("not a map");
        for (uint64_t i = 0; i < pairs; i++) {
            const uint8_t *name;
            uint32_t n;
            if (!read_str(&r, &name, &n)) return bad_params("a key is not a string");
            const char *want = "rate_1au";
            int is_rate = n == 8;
            for (uint32_t k = 0; is_rate && k < 8; k++) is_rate = name[k] == (uint8_t)want[k];
            if (!is_rate) {
                msg_clear();
                msg_str("unknown parameter `");
                msg_bytes((const char *)name, n);
                msg_str("`; this module's parameters are: rate_1au");
                return fail(ERR_INVALID_PARAMETER);
            }
            const uint8_t *text;
            uint32_t tn;
            if (read_str(&r, &text, &tn)) {
                msg_clear();
                msg_str("parameter `rate_1au` must be a number in s^-1, not the text \"");
                msg_bytes((const char *)text, tn);
                msg_str("\"; allowed range [0, 0.001] s^-1");
                return fail(ERR_INVALID_PARAMETER);
            }
            if (!read_number(&r, &rate)) return bad_params("a value is neither a number nor text");
        }
        if (r.left != 0) return bad_params("bytes after the map");
    }
    if (!(rate >= RATE_MIN && rate <= RATE_MAX)) { /* also refuses NaN */
        msg_clear();
        msg_str("parameter `rate_1au` = ");
        msg_double(rate);
        msg_str(" s^-1 is out of range; allowed range [0, 0.001] s^-1");
        return fail(ERR_INVALID_PARAMETER);
    }
    rate_1au = rate;
    initialised = 1;
    return 0;
}

/* -------------------------------------------------------------------------
 * The batch export of the Loss role: n InFlight records in, n rates out.
 * ---------------------------------------------------------------------- */

EXPORT("exobound_loss_rate")
int32_t exobound_loss_rate(const InFlight *in, int32_t n, double *out) {
    if (!initialised) {
        msg_clear();
        msg_str("exobound_init has not succeeded yet");
        return fail(ERR_NOT_INITIALISED);
    }
    if (n < 0) {
        msg_clear();
        msg_str("batch too large");
        return fail(ERR_INVALID_INPUT);
    }
    if (n > 0 && (in == 0 || out == 0 || ((uintptr_t)in & 7) != 0 || ((uintptr_t)out & 7) != 0)) {
        msg_clear();
        msg_str("batch buffers are null or misaligned; buffers must come from exobound_alloc");
        return fail(ERR_INVALID_INPUT);
    }
    for (int32_t i = 0; i < n; i++) {
        double r = in[i].helio_distance;  /* AU */
        double f = in[i].sunlit_fraction; /* dimensionless */
        if (!(r > 0.0 && r < __builtin_inf())) {
            msg_clear();
            msg_str("record ");
            msg_uint((uint64_t)i);
            msg_str(": helio_distance = ");
            msg_double(r);
            msg_str(" AU is not a positive finite distance");
            return fail(ERR_INVALID_INPUT);
        }
        if (!(f >= 0.0 && f <= 1.0)) {
            msg_clear();
            msg_str("record ");
            msg_uint((uint64_t)i);
            msg_str(": sunlit_fraction = ");
            msg_double(f);
            msg_str(" is outside [0, 1]");
            return fail(ERR_INVALID_INPUT);
        }
        out[i] = rate_1au / (r * r) * f; /* s^-1 */
    }
    return n;
}
