/*
 * fuzz_bytes.h — reading typed values from fuzz input bytes, for the
 * bodies that build a structure from raw bytes (entry_inversion.c).  A
 * reader past the end yields zeros, so every input decodes to something.
 *
 * fuzz_bytes_real mixes three kinds of numbers: the edges of IEEE 754
 * binary64 (NaN, ±Inf, ±0, the largest finite, the smallest normal and
 * subnormal, 1e±300), any bit pattern, and values near a typical magnitude
 * given by the caller, so that inputs reach past the validation.  Static
 * inline helpers only; owns nothing.
 */
#ifndef SWAPSPEC_FUZZ_BYTES_H
#define SWAPSPEC_FUZZ_BYTES_H

#include <float.h>
#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

typedef struct {
    const uint8_t *p;
    size_t n;
} fuzz_bytes;

static inline unsigned fuzz_bytes_u8(fuzz_bytes *b) {
    if (b->n == 0)
        return 0;
    b->n--;
    return *b->p++;
}

static inline uint32_t fuzz_bytes_u32(fuzz_bytes *b) {
    uint32_t x = 0;
    for (int i = 0; i < 4; i++)
        x = x << 8 | fuzz_bytes_u8(b);
    return x;
}

static inline uint64_t fuzz_bytes_u64(fuzz_bytes *b) {
    uint64_t hi = fuzz_bytes_u32(b);
    return hi << 32 | fuzz_bytes_u32(b);
}

/* A number: one selector byte, then what it needs. */
static inline double fuzz_bytes_real(fuzz_bytes *b, double typical) {
    unsigned sel = fuzz_bytes_u8(b);
    switch (sel) {
    case 0:
        return (double)NAN;
    case 1:
        return (double)INFINITY;
    case 2:
        return -(double)INFINITY;
    case 3:
        return 0.0;
    case 4:
        return -0.0;
    case 5:
        return DBL_MAX;
    case 6:
        return -DBL_MAX;
    case 7:
        return DBL_MIN;
    case 8:
        return 0x1p-1074; /* the smallest subnormal */
    case 9:
        return 1e300;
    case 10:
        return -1e-300;
    case 11: {
        uint64_t bits = fuzz_bytes_u64(b);
        double x;
        memcpy(&x, &bits, sizeof x);
        return x;
    }
    case 12: /* a small whole number, either sign */
        return (double)((int)fuzz_bytes_u8(b) - 128);
    default: { /* typical · (1 + k/64), k in [-128, 127]: near, far, signs */
        int k = (int)fuzz_bytes_u8(b) - 128;
        return typical * (1.0 + (double)k / 64.0);
    }
    }
}

#endif /* SWAPSPEC_FUZZ_BYTES_H */
