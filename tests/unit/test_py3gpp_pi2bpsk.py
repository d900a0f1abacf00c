"""A real NR helper library's pi/2-BPSK modulator, as shipped, judged as ``pi/2-bpsk`` under
``3gpp`` (3GPP TS 38.211 5.1.1); its plain BPSK claimed as pi/2-BPSK fails ``mapping`` naming the
missing position-dependent rotation.

py3gpp is in the ``test`` extra (so the suite and CI run this), not a dependency of the tool;
the test is skipped only where it cannot be imported.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import make_bench

from modemverify.options import validate_options
from modemverify.oracles import ORACLES
from modemverify.runner import run_oracle

py3gpp = pytest.importorskip("py3gpp", reason="py3gpp (the NR helper library on the package "
                             "registry) is not installed; pip install py3gpp to run this test")


class NrSymbolModulate:
    """py3gpp's nrSymbolModulate as shipped, for one modulation name."""

    def __init__(self, modulation):
        self.modulation = modulation

    def modulate(self, bits):
        return np.asarray(py3gpp.nrSymbolModulate(np.asarray(bits, dtype=int), self.modulation),
                          dtype=np.complex128)


def mapping(device, modulation):
    oracle = ORACLES["mapping"]
    bench = make_bench(device, modulation, "3gpp")
    return list(run_oracle(oracle, bench, validate_options(oracle.options, {}, file=None,
                                                           key="mapping"), seed=7))


def test_py3gpp_pi2_bpsk_passes_as_3gpp_pi2_bpsk():
    [v] = mapping(NrSymbolModulate("pi/2-bpsk"), "pi/2-bpsk")
    assert v.outcome == "pass", v.reason


def test_py3gpp_plain_bpsk_claimed_as_pi2_bpsk_names_the_missing_rotation():
    [v] = mapping(NrSymbolModulate("bpsk"), "pi/2-bpsk")
    assert v.outcome == "fail"
    assert "no position-dependent rotation" in v.reason and "odd positions" in v.reason
    assert "memory" not in v.reason


def test_py3gpp_pi2_bpsk_claimed_as_bpsk_is_recognised():
    [v] = mapping(NrSymbolModulate("pi/2-bpsk"), "bpsk")
    assert v.outcome == "fail" and "+90 degrees on odd positions" in v.reason
