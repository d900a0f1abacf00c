"""Every device-file key is validated by one mechanism (``options.Opt``) when the file is loaded.

Each row is a key with a value of the wrong kind or range; loading must stop with a ConfigError
naming the key and what was expected, before any vector is drawn.
"""

from __future__ import annotations

import pytest

from modemverify.config import COMMON_OPTIONS, SCHEME_OPTIONS, parse_device
from modemverify.errors import ConfigError
from modemverify.oracles import ORACLES


def base(**changes):
    data = {"name": "ref", "adapter": "reference",
            "scheme": {"modulation": "qpsk", "convention": "3gpp"}}
    data.update(changes)
    return data


def scheme(**changes):
    return base(scheme={"modulation": "qpsk", "convention": "3gpp", **changes})


@pytest.mark.parametrize("data,key,words", [
    (base(name=""), "name", "name='': expected non-empty text"),
    (base(name=3), "name", "name=3: expected non-empty text"),
    (base(adapter=["reference"]), "adapter", "expected an adapter name"),
    (base(description=5), "description", "description=5: expected text"),
    (base(params=[1, 2]), "params", "expected a mapping of keyword arguments"),
    (base(scheme="qpsk"), "scheme", "expected a mapping with modulation and convention"),
    (base(checks=["mapping"]), "checks", "expected a mapping of check names to options"),
    (base(fail_on_inconclusive="yes"), "fail_on_inconclusive", "expected true or false"),
    (base(isolate=1), "isolate", "isolate=1: expected true or false"),
    (base(isolate=True, timeout_s=0), "timeout_s", "expected a value > 0"),
    (base(timeout_s=5), "timeout_s", "needs isolate: true"),
    (scheme(samples_per_symbol=2.5), "scheme.samples_per_symbol", "expected a whole number"),
    (scheme(llr_positive_bit=2), "scheme.llr_positive_bit", "expected one of 0, 1"),
    (scheme(tail_samples=-1), "scheme.tail_samples", "expected a value >= 0"),
    (scheme(tail_samples="some"), "scheme.tail_samples", "expected a whole number or auto"),
    (scheme(tail_samples=True), "scheme.tail_samples", "expected a whole number or auto"),
    (scheme(pulse={"shape": "sinc"}), "scheme.pulse.shape", "expected one of rrc, rc"),
    (scheme(alignment={"phase": "no"}), "scheme.alignment.phase", "expected true or false"),
    (scheme(streaming="yes"), "scheme.streaming", "streaming='yes': expected true or false"),
    (base(checks={"streaming": {"max_chunks": 1}}), "checks.streaming.max_chunks",
     "expected a value >= 2"),
    (base(scheme={"convention": "3gpp"}), "scheme.modulation", "missing key 'modulation'"),
    (base(checks={"roundtrip": {"prbs": "prbs16"}}), "checks.roundtrip.prbs",
     "expected one of prbs7, prbs9, prbs11"),
    (base(checks={"ber": {"method": "is"}}), "checks.ber.method",
     "expected one of plain, importance"),
    (base(checks={"ber": {"method": "importance", "guard_ber": 0.1}}), "checks.ber.guard_ber",
     "expected a value <= 0.01"),
    # importance sampling where its per-symbol weights cannot be valid
    (base(scheme={"modulation": "dqpsk", "convention": "gray"},
          checks={"ber": {"method": "importance"}}), "checks.ber.method",
     "a differential detector (dqpsk) decides on two symbols' noise"),
    (base(scheme={"modulation": "qpsk", "convention": "3gpp", "samples_per_symbol": 4,
                  "pulse": {"shape": "rc", "rolloff": 0.25}},
          checks={"ber": {"method": "importance"}}), "checks.ber.method",
     "needs a pulse whose symbols are orthonormal after the matched filter"),
    (base(scheme={"modulation": "oqpsk", "convention": "gray", "samples_per_symbol": 4,
                  "pulse": {"shape": "rrc", "rolloff": 0.25}},
          checks={"ber": {"method": "importance"}}), "checks.ber.method",
     "decides its Q arm half a symbol after its I arm"),
    # numbers are finite (YAML .nan and .inf), the mechanism's own rule for every option
    (base(isolate=True, timeout_s=float("inf")), "timeout_s", "expected a finite number"),
    (base(checks={"ber": {"margin_db": float("nan")}}), "checks.ber.margin_db",
     "expected a finite number"),
    (base(checks={"ber": {"max_bits": float("inf")}}), "checks.ber.max_bits",
     "expected a finite number"),
    (scheme(samples_per_symbol=float("nan")), "scheme.samples_per_symbol",
     "expected a whole number"),
    # sizes are bounded (a value that would exhaust memory is refused at load time)
    (scheme(samples_per_symbol=1e9), "scheme.samples_per_symbol", "expected a value <= 256"),
    (base(scheme={"modulation": "oqpsk", "convention": "gray"}), "scheme.samples_per_symbol",
     "oqpsk delays the Q arm by 0.5 symbol, a property of the waveform: expected an even "
     "number of samples per symbol, 2 or more"),
    (base(scheme={"modulation": "oqpsk", "convention": "gray", "samples_per_symbol": 3}),
     "scheme.samples_per_symbol", "samples_per_symbol=3: oqpsk delays the Q arm"),
    (scheme(samples_per_symbol=8, pulse={"shape": "rrc", "rolloff": 0.3, "span": 1e8}),
     "scheme.pulse.span", "expected a value <= 256"),
    (base(isolate=True, timeout_s=1e9), "timeout_s", "expected a value <= 3600"),
    (base(checks={"evm": {"symbols": 3e8}}), "checks.evm.symbols", "expected a value <= 1048576"),
    (base(checks={"length": {"symbols": [1, 1e9]}}), "checks.length.symbols",
     "at most 256 whole numbers from 1 to 2^20"),
    # an Eb/N0 point no bit budget can judge is refused at load, never skipped
    (base(checks={"ber": {"ebn0_db": [1e300]}}), "checks.ber.ebn0_db", "which no bit budget"),
    (base(checks={"ber": {"ebn0_db": [-300]}}), "checks.ber.ebn0_db", "theory BER for qpsk"),
    (base(checks={"ber": {"ebn0_db": [8, 60]}}), "checks.ber.ebn0_db", "ebn0_db=60"),
    # adapter keys are declared by the adapter and validated by the same mechanism
    (base(adapter="python", target="m.py:M", sample_format="int12"), "sample_format",
     "expected one of complex128"),
    (base(adapter="python", target="m.py:M", sample_format="int16", full_scale=float("nan")),
     "full_scale", "expected a finite number > 0"),
    (base(adapter="sharedlib", library=3), "library", "expected a path such as"),
    (base(adapter="process", command=["x"], env=["A=1"]), "env",
     "expected a mapping of variable names to values"),
    (base(adapter="recorded"), "recording", "missing key 'recording'"),
])
def test_a_wrong_value_names_its_key(data, key, words):
    with pytest.raises(ConfigError) as info:
        parse_device(data, file="dev.yaml")
    assert info.value.file == "dev.yaml"
    assert info.value.key == key
    assert words in str(info.value)


def test_good_values_load():
    spec = parse_device(scheme(tail_samples="auto", samples_per_symbol=4, llr_positive_bit=1,
                               alignment={"phase": False}) | {"params": None, "checks": None})
    assert spec.scheme.tail_samples == 0
    assert spec.scheme.alignment == {"delay": True, "phase": False, "frequency": True}
    assert spec.params == {} and spec.isolate is False and spec.timeout_s == 10.0


def test_every_option_has_a_description():
    tables = [COMMON_OPTIONS, SCHEME_OPTIONS] + [o.options for o in ORACLES.values()]
    missing = [name for table in tables for name, opt in table.items() if not opt.help.strip()]
    assert missing == []
