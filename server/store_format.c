/*
 * store_format.c — the formats of the store that do not depend on a backend:
 * analysis and job ids, calibration names, timestamps, the opaque page cursor
 * and the argument checks of put and list.
 *
 * Timestamps are kept in one fixed text form, "YYYY-MM-DDTHH:MM:SS.mmmZ"
 * (UTC, milliseconds), so that text order is time order in every backend.
 * RFC 3339 inputs (since/until) are converted to that form with our own
 * proleptic Gregorian day arithmetic (no timegm, which is not POSIX).  The
 * cursor is the base64url text of a version byte and the last item's
 * (created_at, id); it is opaque to clients and decoded strictly.
 * Owns no memory.
 */
#include <pthread.h>
#include <stdio.h>
#include <string.h>
#include <sys/random.h>
#include <time.h>

#include "store_internal.h"

/* ------------------------------------------------------------------------ */
/* Calendar arithmetic: days since 0000-01-01 (proleptic Gregorian).         */

static int sf_leap(long y) {
    return (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
}

static int sf_month_days(long y, int m) {
    static const int len[12] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    return m == 2 && sf_leap(y) ? 29 : len[m - 1];
}

/* Days from 0000-01-01 to the first day of year y (y >= 0). */
static long sf_days_before_year(long y) {
    if (y <= 0)
        return 0;
    /* year 0 is a leap year; leap years in 1..y-1 by the usual rule */
    long leaps = 1 + (y - 1) / 4 - (y - 1) / 100 + (y - 1) / 400;
    return 365 * y + leaps;
}

static long sf_days_from_civil(long y, int m, int d) {
    long days = sf_days_before_year(y);
    for (int k = 1; k < m; ++k)
        days += sf_month_days(y, k);
    return days + d - 1;
}

/* Inverse of sf_days_from_civil for days >= 0. */
static void sf_civil_from_days(long days, long *y, int *m, int *d) {
    long year = days / 366; /* never past the answer */
    while (sf_days_before_year(year + 1) <= days)
        ++year;
    days -= sf_days_before_year(year);
    int month = 1;
    while (days >= sf_month_days(year, month)) {
        days -= sf_month_days(year, month);
        ++month;
    }
    *y = year;
    *m = month;
    *d = (int)days + 1;
}

/* Day 0 of the Unix epoch, 1970-01-01, in days since 0000-01-01. */
#define SF_EPOCH_DAYS 719528L
/* Milliseconds of 0000-01-01 .. 9999-12-31T23:59:59.999 relative to 0000. */
#define SF_MS_PER_DAY 86400000LL

/* Formats milliseconds since 0000-01-01T00:00Z in the record form; -1
 * outside the years 0000..9999. */
static int sf_format_ms(long long ms, char out[32]) {
    if (ms < 0 || ms >= sf_days_before_year(10000) * SF_MS_PER_DAY)
        return -1;
    long days = (long)(ms / SF_MS_PER_DAY);
    long long rest = ms % SF_MS_PER_DAY;
    long y;
    int mo, d;
    sf_civil_from_days(days, &y, &mo, &d);
    int h = (int)(rest / 3600000), mi = (int)(rest / 60000 % 60),
        s = (int)(rest / 1000 % 60), milli = (int)(rest % 1000);
    char text[96]; /* roomy: the compiler cannot see the ranges */
    snprintf(text, sizeof text, "%04ld-%02d-%02dT%02d:%02d:%02d.%03dZ", y, mo,
             d, h, mi, s, milli);
    memcpy(out, text, 25); /* always 24 characters and the NUL */
    return 0;
}

/* Reads exactly n decimal digits at *p, advancing it; -1 if any is not. */
static long sf_digits(const char **p, int n) {
    long v = 0;
    for (int i = 0; i < n; ++i) {
        char ch = (*p)[i];
        if (ch < '0' || ch > '9')
            return -1;
        v = v * 10 + (ch - '0');
    }
    *p += n;
    return v;
}

static int sf_expect(const char **p, char a, char b) {
    if (**p != a && **p != b)
        return -1;
    ++*p;
    return 0;
}

int store_time_normalize(const char *s, char out[32]) {
    if (s == NULL)
        return -1;
    const char *p = s;
    long y = sf_digits(&p, 4);
    if (y < 0 || sf_expect(&p, '-', '-'))
        return -1;
    long mo = sf_digits(&p, 2);
    if (mo < 1 || mo > 12 || sf_expect(&p, '-', '-'))
        return -1;
    long d = sf_digits(&p, 2);
    if (d < 1 || d > sf_month_days(y, (int)mo) || sf_expect(&p, 'T', 't'))
        return -1;
    long h = sf_digits(&p, 2);
    if (h < 0 || h > 23 || sf_expect(&p, ':', ':'))
        return -1;
    long mi = sf_digits(&p, 2);
    if (mi < 0 || mi > 59 || sf_expect(&p, ':', ':'))
        return -1;
    long sec = sf_digits(&p, 2);
    if (sec < 0 || sec > 60) /* 60: a leap second (RFC 3339 §5.7) */
        return -1;
    long milli = 0;
    int round_up = 0;
    if (*p == '.') {
        ++p;
        int n = 0;
        for (; *p >= '0' && *p <= '9'; ++p, ++n) {
            if (n < 3)
                milli = milli * 10 + (*p - '0');
            else if (*p != '0')
                round_up = 1;
        }
        if (n == 0)
            return -1;
        for (; n < 3; ++n)
            milli *= 10;
    }
    long offset_min = 0;
    if (*p == 'Z' || *p == 'z') {
        ++p;
    } else if (*p == '+' || *p == '-') {
        int sign = *p == '-' ? -1 : 1;
        ++p;
        long oh = sf_digits(&p, 2);
        if (oh < 0 || oh > 23 || sf_expect(&p, ':', ':'))
            return -1;
        long om = sf_digits(&p, 2);
        if (om < 0 || om > 59)
            return -1;
        offset_min = sign * (oh * 60 + om);
    } else {
        return -1;
    }
    if (*p != '\0')
        return -1;
    long long ms =
        (long long)sf_days_from_civil(y, (int)mo, (int)d) * SF_MS_PER_DAY +
        ((long long)h * 3600 + mi * 60 + sec - offset_min * 60) * 1000LL +
        milli + round_up;
    return sf_format_ms(ms, out);
}

int store_time_canonical(const char *s) {
    char norm[32];
    if (s == NULL || strlen(s) != 24 || s[10] != 'T' || s[23] != 'Z')
        return 0;
    /* the fixed form is its own normal form; anything else differs */
    return store_time_normalize(s, norm) == 0 && strcmp(norm, s) == 0;
}

void store_time_now(char out[32]) {
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    long long ms =
        ((long long)SF_EPOCH_DAYS * 86400 + (long long)ts.tv_sec) * 1000LL +
        ts.tv_nsec / 1000000;
    if (sf_format_ms(ms, out) != 0)
        snprintf(out, 32, "%s", "9999-12-31T23:59:59.999Z");
}

int store_time_from_unix(time_t t, char out[32]) {
    return sf_format_ms(
        ((long long)SF_EPOCH_DAYS * 86400 + (long long)t) * 1000LL, out);
}

/* ------------------------------------------------------------------------ */
/* Ids.                                                                      */

static int sf_lower_hex(const char *s, size_t n) {
    for (size_t i = 0; i < n; ++i)
        if (!((s[i] >= '0' && s[i] <= '9') || (s[i] >= 'a' && s[i] <= 'f')))
            return 0;
    return 1;
}

int store_id_valid(const char *s) {
    return s != NULL && strncmp(s, "an_", 3) == 0 && strlen(s) == 23 &&
           sf_lower_hex(s + 3, 20);
}

/* prefix + 20 lowercase hex characters from the kernel's random source. */
static ss_status sf_random_id(const char *prefix, char out[32], ss_error *err) {
    unsigned char raw[10];
    size_t got = 0;
    while (got < sizeof raw) {
        ssize_t n = getrandom(raw + got, sizeof raw - got, 0);
        if (n < 0)
            return ss_error_set(err, SS_EINTERNAL, "",
                                "the random source failed");
        got += (size_t)n;
    }
    static const char hex[] = "0123456789abcdef";
    size_t p = strlen(prefix);
    memcpy(out, prefix, p);
    for (size_t i = 0; i < sizeof raw; ++i) {
        out[p + 2 * i] = hex[raw[i] >> 4];
        out[p + 1 + 2 * i] = hex[raw[i] & 15];
    }
    out[p + 20] = '\0';
    return SS_OK;
}

/* The counter of store_id_generate, started once at a random value. */
static uint32_t sf_id_counter;
static int sf_id_seeded; /* 1 when seeded, -1 when the random source failed */
static pthread_once_t sf_id_once = PTHREAD_ONCE_INIT;

static void sf_id_seed(void) {
    uint32_t start = 0;
    sf_id_seeded =
        getrandom(&start, sizeof start, 0) == (ssize_t)sizeof start ? 1 : -1;
    __atomic_store_n(&sf_id_counter, start, __ATOMIC_RELAXED);
}

ss_status store_id_generate(char out[32], ss_error *err) {
    pthread_once(&sf_id_once, sf_id_seed);
    if (sf_id_seeded < 0)
        return ss_error_set(err, SS_EINTERNAL, "", "the random source failed");
    struct timespec now;
    clock_gettime(CLOCK_REALTIME, &now);
    uint64_t ms =
        ((uint64_t)now.tv_sec * 1000u + (uint64_t)(now.tv_nsec / 1000000)) &
        0xffffffffffffull; /* 48 bits: until the year 10889 */
    uint32_t n = __atomic_fetch_add(&sf_id_counter, 1u, __ATOMIC_RELAXED);
    snprintf(out, 32, "an_%012llx%08lx", (unsigned long long)ms,
             (unsigned long)n);
    return SS_OK;
}

ss_status store_job_id_generate(char out[32], ss_error *err) {
    return sf_random_id("job_", out, err);
}

int store_job_id_valid(const char *s) {
    return s != NULL && strncmp(s, "job_", 4) == 0 && strlen(s) == 24 &&
           sf_lower_hex(s + 4, 20);
}

int store_calibration_name_valid(const char *s) {
    size_t n = s != NULL ? strlen(s) : 0;
    if (n < 1 || n > STORE_CALIBRATION_NAME_MAX)
        return 0;
    for (size_t i = 0; i < n; ++i)
        if (!((s[i] >= 'a' && s[i] <= 'z') || (s[i] >= '0' && s[i] <= '9') ||
              s[i] == '-'))
            return 0;
    return 1;
}

ss_status store_calibration_name_error(const char *s, const char *field,
                                       ss_error *err) {
    char lower[STORE_CALIBRATION_NAME_MAX + 1];
    size_t n = s != NULL ? strlen(s) : 0;
    int upper = 0;
    for (size_t i = 0; i < n && i < STORE_CALIBRATION_NAME_MAX; ++i) {
        upper |= s[i] >= 'A' && s[i] <= 'Z';
        lower[i] = (char)(s[i] >= 'A' && s[i] <= 'Z' ? s[i] - 'A' + 'a' : s[i]);
        lower[i + 1] = '\0';
    }
    if (s == NULL)
        return ss_error_set(err, SS_EINVAL, field,
                            "%s must be a string: a calibration name", field);
    if (upper && n <= STORE_CALIBRATION_NAME_MAX &&
        store_calibration_name_valid(lower))
        return ss_error_set(err, SS_EINVAL, field,
                            "calibration names are lower case: use '%s'",
                            lower);
    return ss_error_set(err, SS_EINVAL, field,
                        "a calibration name is 1 to %d characters of a-z, 0-9 "
                        "and '-'",
                        STORE_CALIBRATION_NAME_MAX);
}

/* ------------------------------------------------------------------------ */
/* Cursor: base64url (RFC 4648 §5, no padding) of "1" + created_at + id,
 * 48 bytes -> 64 characters.                                                */

static const char sf_b64[] =
    "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_";
#define SF_CURSOR_RAW 48
#define SF_CURSOR_TEXT 64

void store_cursor_encode(const store_position *pos, char out[128]) {
    unsigned char raw[SF_CURSOR_RAW + 1];
    snprintf((char *)raw, sizeof raw, "1%.24s%.23s", pos->created_at, pos->id);
    for (int i = 0, o = 0; i < SF_CURSOR_RAW; i += 3, o += 4) {
        unsigned v = (unsigned)raw[i] << 16 | (unsigned)raw[i + 1] << 8 |
                     (unsigned)raw[i + 2];
        out[o] = sf_b64[v >> 18 & 63];
        out[o + 1] = sf_b64[v >> 12 & 63];
        out[o + 2] = sf_b64[v >> 6 & 63];
        out[o + 3] = sf_b64[v & 63];
    }
    out[SF_CURSOR_TEXT] = '\0';
}

int store_cursor_decode(const char *text, store_position *pos) {
    if (text == NULL || strlen(text) != SF_CURSOR_TEXT)
        return -1;
    char raw[SF_CURSOR_RAW + 1];
    for (int i = 0, o = 0; i < SF_CURSOR_TEXT; i += 4, o += 3) {
        unsigned v = 0;
        for (int k = 0; k < 4; ++k) {
            const char *hit = strchr(sf_b64, text[i + k]);
            if (hit == NULL || text[i + k] == '\0')
                return -1;
            v = v << 6 | (unsigned)(hit - sf_b64);
        }
        raw[o] = (char)(v >> 16 & 255);
        raw[o + 1] = (char)(v >> 8 & 255);
        raw[o + 2] = (char)(v & 255);
    }
    raw[SF_CURSOR_RAW] = '\0';
    if (raw[0] != '1' || memchr(raw, '\0', SF_CURSOR_RAW) != NULL)
        return -1;
    store_position p;
    memcpy(p.created_at, raw + 1, 24);
    p.created_at[24] = '\0';
    memcpy(p.id, raw + 25, 23);
    p.id[23] = '\0';
    if (!store_time_canonical(p.created_at) || !store_id_valid(p.id))
        return -1;
    *pos = p;
    return 0;
}

/* ------------------------------------------------------------------------ */
/* Argument checks.                                                          */

ss_status store_query_check(const store_query *q, store_checked_query *out,
                            const char *path, ss_error *err) {
    store_checked_query c;
    memset(&c, 0, sizeof c);
    if (q == NULL)
        return ss_error_set(err, SS_EINVAL, "", "store %s: no query", path);
    if (q->limit < 1 || q->limit > STORE_LIST_LIMIT_MAX)
        return ss_error_set(err, SS_EINVAL, "limit",
                            "limit must be between 1 and %u, got %u",
                            STORE_LIST_LIMIT_MAX, q->limit);
    if (q->label != NULL &&
        strlen(q->label) >= sizeof((store_record *)0)->label)
        return ss_error_set(err, SS_EINVAL, "label",
                            "label is longer than %zu bytes",
                            sizeof((store_record *)0)->label - 1);
    if (q->since != NULL && store_time_normalize(q->since, c.since) != 0)
        return ss_error_set(err, SS_EINVAL, "since",
                            "since is not an RFC 3339 date-time such as "
                            "2026-12-02T03:50:12Z");
    if (q->until != NULL && store_time_normalize(q->until, c.until) != 0)
        return ss_error_set(err, SS_EINVAL, "until",
                            "until is not an RFC 3339 date-time such as "
                            "2026-12-02T03:50:12Z");
    if (q->cursor != NULL && q->cursor[0] != '\0') {
        if (store_cursor_decode(q->cursor, &c.after) != 0)
            return ss_error_set(err, SS_EINVAL, "cursor",
                                "cursor is not a next_cursor value returned "
                                "by this service");
        c.has_cursor = 1;
    }
    c.label = q->label;
    c.limit = q->limit;
    *out = c;
    return SS_OK;
}

static int sf_terminated(const char *a, size_t size) {
    return memchr(a, '\0', size) != NULL;
}

ss_status store_put_check(const store_record *rec, const char *idem_key,
                          const char *fingerprint, ss_error *err) {
    if (rec == NULL)
        return ss_error_set(err, SS_EINVAL, "", "no record to store");
    if (!sf_terminated(rec->id, sizeof rec->id) || !store_id_valid(rec->id))
        return ss_error_set(err, SS_EINVAL, "id",
                            "id must be \"an_\" and 20 lowercase hex digits");
    if (!sf_terminated(rec->created_at, sizeof rec->created_at) ||
        !store_time_canonical(rec->created_at))
        return ss_error_set(err, SS_EINVAL, "created_at",
                            "created_at must have the form "
                            "2026-12-02T03:50:12.345Z");
    if (!sf_terminated(rec->label, sizeof rec->label))
        return ss_error_set(err, SS_EINVAL, "label", "label is too long");
    if (!sf_terminated(rec->method, sizeof rec->method))
        return ss_error_set(err, SS_EINVAL, "method", "method is too long");
    if (!sf_terminated(rec->software_version, sizeof rec->software_version))
        return ss_error_set(err, SS_EINVAL, "software_version",
                            "software_version is too long");
    if (rec->request_json == NULL)
        return ss_error_set(err, SS_EINVAL, "request", "no request text");
    if (rec->result_json == NULL)
        return ss_error_set(err, SS_EINVAL, "result", "no result text");
    if (idem_key == NULL)
        return SS_OK;
    size_t n = strlen(idem_key);
    int printable = n >= 1 && n <= STORE_IDEMPOTENCY_KEY_MAX;
    for (size_t i = 0; printable && i < n; ++i)
        printable = idem_key[i] >= 0x20 && idem_key[i] <= 0x7e;
    if (!printable)
        return ss_error_set(err, SS_EINVAL, "idempotency_key",
                            "an idempotency key is 1 to %u printable ASCII "
                            "characters",
                            STORE_IDEMPOTENCY_KEY_MAX);
    if (fingerprint == NULL || strlen(fingerprint) != 64 ||
        !sf_lower_hex(fingerprint, 64))
        return ss_error_set(err, SS_EINVAL, "fingerprint",
                            "the fingerprint must be 64 lowercase hex digits");
    return SS_OK;
}
