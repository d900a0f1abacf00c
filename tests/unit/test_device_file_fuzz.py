"""Fuzzing device-file values: every value a YAML file can hold either loads or is a ConfigError.

Hypothesis draws a valid device file and replaces one value (top level, scheme, pulse,
alignment, or any check's option) with something odd: NaN, infinities, huge and negative
numbers, booleans, deep nesting, odd strings (controls, surrogates), lists, mappings. Loading
must never raise anything but ConfigError; a file that loads must keep every number finite and
every gate on (no check silently disabled by an odd value).
"""

from __future__ import annotations

import math

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from modemverify.config import COMMON_OPTIONS, SCHEME_OPTIONS, parse_device
from modemverify.errors import ConfigError
from modemverify.oracles import ORACLES
from modemverify.schemes.theory import ber as theory_ber

BASE = {"name": "fuzz", "adapter": "reference",
        "scheme": {"modulation": "16qam", "convention": "3gpp"}}

odd_numbers = st.sampled_from([math.nan, math.inf, -math.inf, 1e300, -1e300, 1e9, -1, 0,
                               -0.0, 2**63, 1e-320, 0.5, 3])
odd_text = st.text(max_size=12) | st.sampled_from(["", "\x00", "\x1b[2J", "\udcff", "..",
                                                  "/etc/passwd", "auto", "nan", "1e999"])
deep = st.recursive(st.none() | st.booleans() | odd_numbers | odd_text,
                    lambda inner: st.lists(inner, max_size=3) |
                    st.dictionaries(odd_text, inner, max_size=3), max_leaves=40)
values = odd_numbers | odd_text | st.booleans() | st.none() | deep | st.lists(odd_numbers,
                                                                              max_size=4)

places = (
    [("top", k) for k in COMMON_OPTIONS if k not in ("adapter", "scheme", "checks")]
    + [("scheme", k) for k in SCHEME_OPTIONS]
    + [("pulse", k) for k in ("shape", "rolloff", "span", "bt")]
    + [("alignment", k) for k in ("delay", "phase", "frequency")]
    + [("check", f"{c}.{k}") for c, o in ORACLES.items() for k in o.options]
)


def _with(place, key, value):
    data = {**BASE, "scheme": dict(BASE["scheme"])}
    if place == "top":
        data[key] = value
    elif place == "scheme":
        data["scheme"][key] = value
    elif place == "pulse":
        data["scheme"].update(samples_per_symbol=4, pulse={"shape": "rrc", "rolloff": 0.3,
                                                           "span": 8, key: value})
    elif place == "alignment":
        data["scheme"]["alignment"] = {key: value}
    else:
        check, option = key.split(".", 1)
        data["checks"] = {check: {option: value}}
    return data


def _numbers(x):
    if isinstance(x, bool):
        return
    if isinstance(x, (int, float)):
        yield x
    elif isinstance(x, dict):
        for v in x.values():
            yield from _numbers(v)
    elif isinstance(x, (list, tuple)):
        for v in x:
            yield from _numbers(v)


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(place=st.sampled_from(places), value=values)
def test_odd_values_load_or_are_config_errors(place, value):
    where, key = place
    try:
        spec = parse_device(_with(where, key, value), file="fuzz.yaml")
    except ConfigError as exc:
        assert exc.file == "fuzz.yaml"
        return
    # it loaded: every number it holds is finite, and no check was switched off by it
    assert all(math.isfinite(x) for x in _numbers(spec.checks)), spec.checks
    assert all(math.isfinite(x) for x in _numbers(vars(spec.scheme)) if x is not None)
    assert all(spec.checks[name] is not None for name in ORACLES)
    # every BER point it asks for can be judged: theory BER and limit strictly inside (0, 0.5)
    ber = spec.checks["ber"]
    for x in ber["ebn0_db"] or []:
        for at in (x, x - ber["margin_db"]):
            assert 1e-300 < theory_ber(spec.scheme.modulation, at) < 0.5, (x, at)
