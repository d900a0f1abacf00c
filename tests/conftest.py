"""Shared fixtures: small device classes, broken on purpose, and a bench builder."""

from __future__ import annotations

import numpy as np
import pytest

from modemverify.adapters.python import PythonAdapter
from modemverify.bench import Bench, open_bench
from modemverify.config import parse_device


class TableModem:
    """A device defined by an explicit label -> point table (modulate and nearest demodulate).

    ``table`` is indexed by the label integer (first-fed bit most significant). Written
    independently of modemverify's reference modem on purpose.
    """

    def __init__(self, table, k, *, sides=("modulate", "demodulate")):
        self.table = np.asarray(table, dtype=np.complex128)
        self.k = k
        if "modulate" not in sides:
            self.modulate = None
        if "demodulate" not in sides:
            self.demodulate = None

    def modulate(self, bits):  # noqa: F811 - may be shadowed by None above
        b = np.asarray(bits).reshape(-1, self.k)
        return self.table[b @ (1 << np.arange(self.k - 1, -1, -1))]

    def demodulate(self, samples):  # noqa: F811
        idx = np.abs(np.asarray(samples)[:, None] - self.table[None, :]).argmin(axis=1)
        return ((idx[:, None] >> np.arange(self.k - 1, -1, -1)) & 1).astype(np.uint8).ravel()


def make_spec(modulation="qpsk", convention="3gpp", sps=1, checks=None, **extra):
    return parse_device({"name": extra.pop("name", "dut"), "adapter": "python",
                         "target": "tests:dut", "checks": checks or {},
                         "scheme": {"modulation": modulation, "convention": convention,
                                    "samples_per_symbol": sps, **extra}})


def make_bench(device, modulation="qpsk", convention="3gpp", sps=1, checks=None,
               **scheme) -> Bench:
    spec = make_spec(modulation, convention, sps, checks, **scheme)
    return open_bench(spec, PythonAdapter(device))


@pytest.fixture
def bench_for():
    return make_bench


@pytest.fixture
def table_modem():
    return TableModem
