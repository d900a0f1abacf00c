"""Sample formats: conversions, rounding and saturation, SQNR of ideal quantisation."""

import math

import numpy as np
import pytest

from modemverify.dsp.formats import (
    PYTHON_FORMATS,
    SAMPLE_FORMATS,
    WIRE_FORMATS,
    check_format,
    check_full_scale,
    clip_count,
    encode_samples,
    from_format,
    parse_format,
    sqnr_db,
    to_format,
)
from modemverify.errors import ConfigError, UnknownNameError

TOP = {"int16": 32768, "int8": 128}  # Q15 / Q7: value = code x full_scale / 2**(b-1)


def test_parse_format():
    assert parse_format("Complex64") == "complex64"
    assert set(SAMPLE_FORMATS) == {"complex128", "complex64", "float32", "int16", "int8"}
    assert set(PYTHON_FORMATS) | set(WIRE_FORMATS) == set(SAMPLE_FORMATS)
    known = "complex128, complex64, float32, int16, int8"
    with pytest.raises(UnknownNameError, match=f"sample format named 'int12'; known: {known}") as e:
        parse_format("int12")
    assert e.value.known == sorted(SAMPLE_FORMATS)


def test_the_table():
    # sizes of IEEE 754 binary64 / binary32 and of two's-complement 16- and 8-bit integers,
    # two of them a complex sample (common practice); Q15 / Q7: full_scale is code 2**(b-1)
    sizes = {name: (f.bytes_per_sample, f.bits, f.top) for name, f in SAMPLE_FORMATS.items()}
    assert sizes == {"complex128": (16, 64, 0), "complex64": (8, 32, 0), "float32": (8, 32, 0),
                     "int16": (4, 16, 32768), "int8": (2, 8, 128)}
    assert [f.name for f in SAMPLE_FORMATS.values() if f.interleaved] == \
        ["float32", "int16", "int8"]


def test_full_scale_and_format_keys_are_checked_in_one_place():
    assert check_full_scale(2) == 2.0 and isinstance(check_full_scale(np.float32(0.5)), float)
    for bad in (0, -1.0, math.inf, math.nan, True, "1", None):
        with pytest.raises(ConfigError) as info:
            check_full_scale(bad, file="dev.yaml", key="samples.full_scale")
        assert info.value.key == "samples.full_scale" and info.value.file == "dev.yaml"
        assert f"full_scale={bad!r}: expected a finite number > 0" in str(info.value)
    assert check_format("int16", WIRE_FORMATS) == "int16"
    for bad in ("int8", "INT16", ["int16"], None):
        with pytest.raises(ConfigError, match="expected one of float32, int16") as info:
            check_format(bad, WIRE_FORMATS)
        assert info.value.key == "sample_format"


@pytest.mark.parametrize("fmt", ["int16", "int8"])
@pytest.mark.parametrize("full_scale", [1.0, 0.25, 3000.0])
def test_round_trip_within_half_an_lsb(fmt, full_scale):
    rng = np.random.default_rng(16)
    top = (TOP[fmt] - 1) / TOP[fmt]  # the largest positive value: (2**(b-1) - 1) codes
    x = full_scale * top * (rng.uniform(-1, 1, 10000) + 1j * rng.uniform(-1, 1, 10000))
    codes, clipped = to_format(x, fmt, full_scale)
    assert clipped == 0 and codes.dtype == np.dtype(fmt) and codes.size == 2 * x.size
    y = from_format(codes, fmt, full_scale)
    lsb = full_scale / TOP[fmt]
    err = np.concatenate([np.abs(y.real - x.real), np.abs(y.imag - x.imag)])
    assert err.max() <= lsb / 2 * (1 + 1e-9)
    # interleaving: I first
    assert codes[0] == round(x[0].real / lsb) and codes[1] == round(x[0].imag / lsb)


@pytest.mark.parametrize("fmt", ["int16", "int8"])
def test_saturation_is_counted(fmt):
    # two's-complement saturation (common practice for Q15 / Q7 datapaths): codes span
    # -2**(b-1) .. 2**(b-1) - 1, value = code x full_scale / 2**(b-1)
    top = TOP[fmt]
    x = np.array([0.5, 1.2 + 0j, -3.0 - 0.1j, 0.2 + 1.01j, -1.0 + 0.5j])
    codes, clipped = to_format(x, fmt, 1.0)
    assert clipped == 3                      # samples 1, 2 and 3 exceed the range
    pairs = codes.reshape(-1, 2)
    assert pairs[1, 0] == top - 1 and pairs[2, 0] == -top and pairs[3, 1] == top - 1
    assert pairs[4, 0] == -top               # exactly -full_scale is representable
    # at the rails: samples 1, 2, 3 and 4 (-full_scale sits on the negative rail)
    assert clip_count(codes, fmt) == 4
    assert clip_count(np.array([-top, 0, 0, 0], dtype=fmt), fmt) == 1


def test_complex_formats():
    x = np.array([1 + 2j, -0.5 + 1e-9j, 3e39 + 0j])
    y, over = to_format(x, "complex64")
    assert y.dtype == np.complex64 and over == 1          # 3e39 overflows float32
    np.testing.assert_allclose(from_format(y[:2], "complex64"), x[:2], rtol=1e-7)
    z, over = to_format(x, "complex128")
    assert over == 0 and np.array_equal(z, x) and z is not x
    assert clip_count(z, "complex128") == 0


def test_float32_is_interleaved_complex64():
    # float32 I, Q pairs are the bytes of complex64 (numpy stores a complex as real, imaginary)
    x = np.array([1 + 2j, -0.5 + 1e-9j, 0.1 - 0.3j, 3e39 + 0j])
    iq, over = to_format(x, "float32")
    assert iq.dtype == np.dtype("<f4") and iq.size == 8 and over == 1   # 3e39 overflows
    with np.errstate(over="ignore"):
        assert iq.tobytes() == x.astype("<c8").tobytes()
    assert iq[0] == 1 and iq[1] == 2                                      # I first
    np.testing.assert_array_equal(from_format(iq.tobytes(), "float32")[:3],
                                  x[:3].astype(np.complex64))
    np.testing.assert_array_equal(from_format(iq.reshape(-1, 2)[:3], "float32"),
                                  x[:3].astype(np.complex64))
    with pytest.raises(ConfigError, match="whole number of float32 samples"):
        from_format(iq.tobytes()[:12], "float32")
    with pytest.raises(ConfigError, match="real I/Q values"):
        from_format(np.zeros(4, complex), "float32")


def test_encode_samples_is_to_format_without_the_checks():
    rng = np.random.default_rng(3)
    x = 1.5 * (rng.normal(size=999) + 1j * rng.normal(size=999))   # some beyond full scale
    for fmt in SAMPLE_FORMATS:
        for full_scale in (1.0, 2.5):
            a, _ = to_format(x, fmt, full_scale)
            b = encode_samples(x, fmt, full_scale)
            assert a.dtype == b.dtype and a.tobytes() == b.tobytes(), fmt
    # unchecked: NaN passes to a floating-point format instead of raising
    assert np.isnan(encode_samples([np.nan + 0j], "float32")[0])
    with pytest.raises(ConfigError, match="finite"):
        to_format([np.nan + 0j], "float32")
    with pytest.raises(ConfigError, match="full_scale"):
        encode_samples([0j], "int16", full_scale=-1)


def test_bytes_are_little_endian():
    x = np.array([0.5 - 0.25j, -1 + 1j])
    codes, _ = to_format(x, "int16")
    raw = codes.astype("<i2").tobytes()
    np.testing.assert_array_equal(from_format(raw, "int16"), from_format(codes, "int16"))
    assert raw[:2] == (16384).to_bytes(2, "little", signed=True)
    np.testing.assert_array_equal(from_format(x.astype("<c8").tobytes(), "complex64"),
                                  x.astype(np.complex64))
    with pytest.raises(ConfigError, match="whole number"):
        from_format(raw[:3], "int16")


def test_from_format_checks():
    np.testing.assert_array_equal(from_format(np.array([[64, 0], [0, -128]]), "int8"),
                                  [0.5 + 0j, -1j])
    with pytest.raises(ConfigError, match="range"):
        from_format(np.array([200, 0]), "int8")
    with pytest.raises(ConfigError, match="interleaved"):
        from_format(np.array([1, 2, 3], dtype=np.int16), "int16")
    with pytest.raises(ConfigError, match="full_scale"):
        to_format(np.zeros(2), "int16", full_scale=0)
    with pytest.raises(ConfigError, match="finite"):
        to_format(np.array([np.inf]), "int8")


# ---------------------------------------------------------------------------------------------
# SQNR


def _tone(n, complex_exp):
    # an incommensurate frequency, so the rounding error is spread uniformly (common practice)
    ph = 2 * np.pi * 0.1234567 * np.arange(n)
    return np.exp(1j * ph) if complex_exp else np.cos(ph) + 0j


@pytest.mark.parametrize("fmt, bits", [("int16", 16), ("int8", 8)])
@pytest.mark.parametrize("complex_exp", [False, True])
def test_sqnr_of_a_full_scale_sine(fmt, bits, complex_exp):
    # Common practice: an ideal b-bit rounding quantiser and a full-scale sine give
    # SQNR = 6.02 b + 1.76 dB (noise D^2/12 per rail). A tone that must not saturate peaks at
    # 2**(b-1) - 1 codes instead of 2**(b-1), 20 log10((2**(b-1)-1)/2**(b-1)) dB lower. A complex
    # exponential (full-scale sine on I and cosine on Q) has twice the signal and twice the
    # noise, hence the same value; a real sine leaves Q at exactly 0 (no noise there).
    half = 2 ** (bits - 1)
    x = _tone(1 << 16, complex_exp) * (half - 1) / half
    codes, clipped = to_format(x, fmt)
    assert clipped == 0
    expected = 6.02 * bits + 1.76 + 20 * math.log10((half - 1) / half)
    # Allowance: 0.02 dB for the rounding of 6.02/1.76; at 8 bits the error is not quite
    # independent of the signal and the least-squares gain absorbs the correlated part
    # (measured +0.13 dB; +0.03 dB at 16 bits).
    assert sqnr_db(from_format(codes, fmt), x) == pytest.approx(expected, abs=0.2)
    # raw codes are accepted too
    assert sqnr_db(codes, x) == pytest.approx(sqnr_db(from_format(codes, fmt), x), abs=1e-9)


def test_sqnr_ordering_and_gain_invariance():
    x = 0.7 * _tone(1 << 14, True)
    s16 = sqnr_db(from_format(to_format(x, "int16")[0], "int16"), x)
    s8 = sqnr_db(from_format(to_format(x, "int8")[0], "int8"), x)
    assert s16 > s8
    assert s16 - s8 == pytest.approx(20 * math.log10(32768 / 128), abs=0.3)  # ~48.2 dB
    y = from_format(to_format(x, "int8")[0], "int8")
    assert sqnr_db(3j * y, x) == pytest.approx(s8, abs=1e-9)   # least-squares gain removed
    assert sqnr_db(x, x) == math.inf
    with pytest.raises(ConfigError, match="same non-zero length"):
        sqnr_db(x[:3], x)
