/*
 * Example device for `adapter: sharedlib`: a QPSK modem following 3GPP TS 38.211 5.1.3,
 *   d(i) = ((1 - 2 b(2i)) + j (1 - 2 b(2i+1))) / sqrt(2),
 * written against the modemverify shared-library ABI (float32 interleaved I, Q).
 * An invented example device; it shares no code with modemverify.
 *
 * Build:  cc -O2 -shared -fPIC -o libqpsk3gpp.so qpsk_3gpp.c
 */
#include <stddef.h>
#include <stdint.h>

#define AMP 0.70710678118654752f /* 1/sqrt(2) */

/* bits: one bit per byte, n_bits of them; iq: room for `capacity` complex samples. */
long qpsk_modulate(const uint8_t *bits, size_t n_bits, float *iq, size_t capacity)
{
    size_t n_sym = n_bits / 2;
    if (n_bits % 2)
        return -1;          /* not a whole number of symbols */
    if (n_sym > capacity)
        return -2;          /* the caller's buffer is too small */
    for (size_t i = 0; i < n_sym; i++) {
        iq[2 * i] = bits[2 * i] ? -AMP : AMP;         /* b(2i) drives I, 0 -> + */
        iq[2 * i + 1] = bits[2 * i + 1] ? -AMP : AMP; /* b(2i+1) drives Q */
    }
    return (long)n_sym;
}

/* Hard decisions: the sign of each arm. */
long qpsk_demodulate(const float *iq, size_t n_samples, uint8_t *bits, size_t capacity)
{
    if (2 * n_samples > capacity)
        return -2;
    for (size_t i = 0; i < n_samples; i++) {
        bits[2 * i] = iq[2 * i] < 0.0f;
        bits[2 * i + 1] = iq[2 * i + 1] < 0.0f;
    }
    return (long)(2 * n_samples);
}

/* Exact LLRs, positive meaning bit 0: L = 2 sqrt(2) y / N0 per arm. */
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
