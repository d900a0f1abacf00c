"""C modems for the adapter tests, built with the machine's C compiler into a temporary folder.

They are written here against the shared-library ABI only (no modemverify code), the way a
third party would: TS 38.211 5.1.3 QPSK, d = ((1 - 2 b0) + j (1 - 2 b1)) / sqrt(2), plus one
defect each, chosen with -D at build time. 16QAM follows TS 38.211 5.1.4 (I from b0, b2; Q from
b1, b3), in int16 Q15.
"""

from __future__ import annotations

import shutil
import subprocess
import textwrap
from pathlib import Path

import pytest
import yaml

CC = shutil.which("cc") or shutil.which("gcc") or shutil.which("clang")

needs_cc = pytest.mark.skipif(CC is None, reason="no C compiler (cc) on this machine")

QPSK_C = r"""
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <stdio.h>
#include <signal.h>

#define AMP 0.70710678118654752f

long mod(const uint8_t *bits, size_t n_bits, float *iq, size_t capacity)
{
    size_t n = n_bits / 2;
    if (n > capacity) return -2;
#ifdef ERRCODE
    if (n_bits > 4096) return -3;            /* "block too long" */
#endif
#ifdef SEGFAULT
    if (n_bits > 6000) {                     /* a planted bug: long blocks dereference NULL */
        volatile float *p = NULL;
        p[0] = 1.0f;
    }
#endif
#ifdef ABORT
    if (n_bits > 6000) {
        fprintf(stderr, "qpsk: block of %zu bits exceeds the frame buffer\n", n_bits);
        abort();
    }
#endif
    for (size_t i = 0; i < n; i++) {
        float re = bits[2 * i] ? -AMP : AMP;
        float im = bits[2 * i + 1] ? -AMP : AMP;
#ifdef SWAP
        float t = re; re = im; im = t;        /* the arms swapped */
#endif
        iq[2 * i] = re;
        iq[2 * i + 1] = im;
    }
#ifdef OVERRUN
    iq[2 * capacity + 3] = 0.0f;              /* writes past the buffer */
#endif
#ifdef FAR_OVERRUN
    for (size_t i = 0; i < 64; i++)           /* 64 floats, 1000 elements past the buffer */
        iq[2 * capacity + 1000 + i] = 0.5f;
#endif
#ifdef UNDERRUN
    if (n_bits > 6000)                        /* long blocks: a bad offset before the buffer */
        for (size_t i = 1; i <= 8; i++)
            iq[-(long)i] = 0.0f;
#endif
#ifdef INPUT_OVERRUN
    ((uint8_t *)bits)[n_bits + 5] = 1;        /* scribbles past its (const) input */
#endif
    return (long)n;
}

long demod(const float *iq, size_t n_samples, uint8_t *bits, size_t capacity)
{
    if (2 * n_samples > capacity) return -2;
    for (size_t i = 0; i < n_samples; i++) {
        float re = iq[2 * i], im = iq[2 * i + 1];
#ifdef SWAP
        float t = re; re = im; im = t;
#endif
        bits[2 * i] = re < 0.0f;
        bits[2 * i + 1] = im < 0.0f;
    }
#ifdef HANG
    if (n_samples > 3000) for (;;) { }
#endif
    return (long)(2 * n_samples);
}
"""

QAM16_INT16_C = r"""
#include <stddef.h>
#include <stdint.h>

/* TS 38.211 5.1.4: I = (1-2 b0)(2-(1-2 b2))/sqrt(10), Q = (1-2 b1)(2-(1-2 b3))/sqrt(10).
   Q15 with full scale 1: one unit of 1/sqrt(10) is 32768/sqrt(10) = 10362.2 -> 10362. */
static int16_t axis(uint8_t sign, uint8_t mag)
{
    int v = mag ? 3 : 1;
    v = sign ? -v : v;
    return (int16_t)(v * 10362);
}

long mod16(const uint8_t *b, size_t n_bits, int16_t *iq, size_t capacity)
{
    size_t n = n_bits / 4;
    if (n > capacity) return -2;
    for (size_t i = 0; i < n; i++) {
        iq[2 * i] = axis(b[4 * i], b[4 * i + 2]);
        iq[2 * i + 1] = axis(b[4 * i + 1], b[4 * i + 3]);
    }
    return (long)n;
}

static void slice(int16_t x, uint8_t *sign, uint8_t *mag)
{
    *sign = x < 0;
    int a = x < 0 ? -x : x;
    *mag = a > 2 * 10362;
}

long demod16(const int16_t *iq, size_t n, uint8_t *b, size_t capacity)
{
    if (4 * n > capacity) return -2;
    for (size_t i = 0; i < n; i++) {
        slice(iq[2 * i], &b[4 * i], &b[4 * i + 2]);
        slice(iq[2 * i + 1], &b[4 * i + 1], &b[4 * i + 3]);
    }
    return (long)(4 * n);
}
"""


def build_library(folder: Path, source: str, name: str, defines=()) -> Path:
    """Compile ``source`` into ``folder/lib{name}.so``."""
    src = folder / f"{name}.c"
    src.write_text(textwrap.dedent(source))
    out = folder / f"lib{name}.so"
    cmd = [CC, "-O1", "-shared", "-fPIC", "-o", str(out), str(src)]
    cmd += [f"-D{d}" for d in defines]
    subprocess.run(cmd, check=True, capture_output=True, text=True)
    return out


def build_program(folder: Path, source_path: Path, name: str) -> Path:
    out = folder / name
    subprocess.run([CC, "-O2", "-o", str(out), str(source_path), "-lm"], check=True,
                   capture_output=True, text=True)
    return out


def write_device(folder: Path, name: str, body: dict) -> Path:
    path = folder / f"{name}.yaml"
    path.write_text(yaml.safe_dump({"name": name, **body}, sort_keys=False))
    return path


def qpsk_sharedlib(folder: Path, name: str, defines=(), **extra) -> Path:
    """Build the QPSK library with ``defines`` and write a device file for it."""
    lib = build_library(folder, QPSK_C, name, defines)
    return write_device(folder, name, {
        "adapter": "sharedlib", "library": lib.name,
        "symbols": {"modulate": "mod", "demodulate": "demod"},
        "scheme": {"modulation": "qpsk", "convention": "3gpp"}, **extra})
