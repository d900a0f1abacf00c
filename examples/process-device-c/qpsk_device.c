/*
 * Example device process for `adapter: process`: a QPSK modem per 3GPP TS 38.211 5.1.3,
 *   d(i) = ((1 - 2 b(2i)) + j (1 - 2 b(2i+1))) / sqrt(2),
 * speaking the modemverify frame protocol on stdin/stdout (see README.md beside this file).
 * An invented example device; it shares no code with modemverify.
 *
 * Build:  cc -O2 -o qpsk-device qpsk_device.c -lm
 * Build the same modem as a shared library (for the sharedlib adapter or the benchmark):
 *         cc -O2 -shared -fPIC -DQPSK_LIBRARY_ONLY -o libqpsk-device.so qpsk_device.c -lm
 *
 * Options (for tests of the harness):  --crash-over N  abort() on a modulate request of more
 * than N bits, after a message on stderr.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define AMP 0.70710678118654752f /* 1/sqrt(2) */

/* ---- the modem: the shared-library ABI ---------------------------------------------- */

long qpsk_modulate(const uint8_t *bits, size_t n_bits, float *iq, size_t capacity)
{
    size_t n = n_bits / 2;
    if (n_bits % 2)
        return -1;
    if (n > capacity)
        return -2;
    for (size_t i = 0; i < n; i++) {
        iq[2 * i] = bits[2 * i] ? -AMP : AMP;
        iq[2 * i + 1] = bits[2 * i + 1] ? -AMP : AMP;
    }
    return (long)n;
}

long qpsk_demodulate(const float *iq, size_t n_samples, uint8_t *bits, size_t capacity)
{
    if (2 * n_samples > capacity)
        return -2;
    for (size_t i = 0; i < 2 * n_samples; i++)
        bits[i] = iq[i] < 0.0f;
    return (long)(2 * n_samples);
}

/* Exact LLRs, positive meaning bit 0: 2 sqrt(2) y / N0 per arm. */
long qpsk_demodulate_soft(const float *iq, size_t n_samples, double noise_var, float *llr,
                          size_t capacity)
{
    if (2 * n_samples > capacity)
        return -2;
    if (!(noise_var > 0.0))
        return -3;
    double scale = 2.0 * 1.41421356237309505 / noise_var;
    for (size_t i = 0; i < 2 * n_samples; i++)
        llr[i] = (float)(scale * iq[i]);
    return (long)(2 * n_samples);
}

#ifndef QPSK_LIBRARY_ONLY

/* ---- the protocol ---------------------------------------------------------------------- */
/* Frame header, 16 bytes: "MV", version 1, type letter, uint32 LE sequence number,
   uint64 LE payload length. This code assumes a little-endian machine. */

static const char HELLO[] =
    "{\"protocol\": 1, \"capabilities\": [\"modulate\", \"demodulate\", \"demodulate_soft\"], "
    "\"sample_format\": \"float32\", \"name\": \"qpsk-device (C example)\"}";

static int read_all(void *buf, size_t n)
{
    return fread(buf, 1, n, stdin) == n;
}

static void write_frame(char type, uint32_t seq, const void *a, size_t na, const void *b,
                        size_t nb)
{
    unsigned char h[16] = {'M', 'V', 1, (unsigned char)type};
    uint64_t len = (uint64_t)na + nb;
    memcpy(h + 4, &seq, 4);
    memcpy(h + 8, &len, 8);
    fwrite(h, 1, 16, stdout);
    if (na)
        fwrite(a, 1, na, stdout);
    if (nb)
        fwrite(b, 1, nb, stdout);
    fflush(stdout);
}

static void write_error(uint32_t seq, int32_t code, const char *msg)
{
    write_frame('E', seq, &code, 4, msg, strlen(msg));
}

int main(int argc, char **argv)
{
    long crash_over = -1;
    for (int i = 1; i + 1 < argc; i++)
        if (strcmp(argv[i], "--crash-over") == 0)
            crash_over = atol(argv[i + 1]);

    static unsigned char buf[1 << 16];
    unsigned char h[16];
    unsigned char *payload = NULL;
    size_t payload_cap = 0;
    void *out = NULL;
    size_t out_cap = 0;

    while (read_all(h, 16)) {
        uint32_t seq;
        uint64_t len;
        memcpy(&seq, h + 4, 4);
        memcpy(&len, h + 8, 8);
        if (h[0] != 'M' || h[1] != 'V' || h[2] != 1) {
            fprintf(stderr, "qpsk-device: bad frame header\n");
            return 2;
        }
        if (len > payload_cap) {
            free(payload);
            payload_cap = len;
            payload = malloc(payload_cap);
            if (!payload) {
                fprintf(stderr, "qpsk-device: out of memory\n");
                return 3;
            }
        }
        if (len && !read_all(payload, len))
            return 2;
        char type = (char)h[3];
        if (type == 'Q')
            return 0;
        if (type == 'H') { /* the harness's hello: JSON we do not need */
            write_frame('H', seq, HELLO, sizeof HELLO - 1, NULL, 0);
            continue;
        }
        /* every reply fits in 16 bytes per input bit or sample, times two */
        size_t need = 16 * (size_t)len + 16;
        if (need > out_cap) {
            free(out);
            out_cap = need;
            out = malloc(out_cap);
            if (!out) {
                write_error(seq, -12, "out of memory");
                continue;
            }
        }
        long r;
        size_t unit;
        if (type == 'M') {
            if (crash_over >= 0 && (long)len > crash_over) {
                fprintf(stderr, "qpsk-device: %llu bits is more than the frame buffer holds\n",
                        (unsigned long long)len);
                abort();
            }
            r = qpsk_modulate(payload, len, out, out_cap / 8);
            unit = 8;
        } else if (type == 'D') {
            r = qpsk_demodulate((const float *)payload, len / 8, out, out_cap);
            unit = 1;
        } else if (type == 'S') {
            double noise_var;
            memcpy(&noise_var, payload, 8);
            r = qpsk_demodulate_soft((const float *)(payload + 8), (len - 8) / 8, noise_var,
                                     out, out_cap / 4);
            unit = 4;
        } else {
            snprintf((char *)buf, sizeof buf, "unknown request type '%c'", type);
            write_error(seq, -22, (const char *)buf);
            continue;
        }
        if (r < 0) {
            write_error(seq, (int32_t)r, "the modem refused the request");
            continue;
        }
        write_frame('R', seq, out, (size_t)r * unit, NULL, 0);
    }
    return 0; /* end of input: the harness has gone */
}

#endif /* QPSK_LIBRARY_ONLY */
