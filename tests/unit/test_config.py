"""Device files: every mistake gives one message naming the file, the key and what was expected."""

from __future__ import annotations

import textwrap

import pytest

from modemverify.config import load_device
from modemverify.errors import ConfigError
from modemverify.oracles import ORACLES

GOOD = """
name: qpsk-port
adapter: python
target: devices/modems.py:Qpsk3gpp
scheme: {modulation: qpsk, convention: 3gpp}
"""


def write(tmp_path, text, name="dev.yaml"):
    (tmp_path / "devices").mkdir(exist_ok=True)
    src = __import__("pathlib").Path(__file__).parent / "devices" / "modems.py"
    (tmp_path / "devices" / "modems.py").write_text(src.read_text())
    p = tmp_path / name
    p.write_text(textwrap.dedent(text))
    return p


def test_good_file_loads(tmp_path):
    path = write(tmp_path, GOOD)
    spec = load_device(path)
    assert (spec.name, spec.adapter, spec.target, spec.file) == (
        "qpsk-port", "python", "devices/modems.py:Qpsk3gpp", str(path))
    s = spec.scheme
    assert (s.modulation, s.convention, s.samples_per_symbol, s.bits_per_symbol) == (
        "qpsk", "3gpp", 1, 2)
    # no checks section: every check runs with its documented defaults
    assert set(spec.checks) == set(ORACLES)
    assert spec.checks["mapping"] == {name: opt.default
                                      for name, opt in ORACLES["mapping"].options.items()}


@pytest.mark.parametrize("text,key,words", [
    ("name: x\nadapter: python\ntarget: m.py:M\n", "scheme", "missing key 'scheme'"),
    (GOOD.replace("modulation: qpsk", "modulation: 17qam"), "scheme.modulation",
     "expected one of bpsk, qpsk"),
    (GOOD.replace("convention: 3gpp", "convention: dvb-s2x"), "scheme.convention",
     "expected one of 3gpp"),
    (GOOD.replace("modulation: qpsk", "modulation: 8psk"), "scheme.convention",
     "defines no 8psk"),
    (GOOD + "samples_per_symbl: 2\n", "samples_per_symbl", "unknown key"),
    (GOOD.replace("scheme: {", "scheme: {samples_per_symbol: 0, "),
     "scheme.samples_per_symbol", "expected a value >= 1"),
    (GOOD + "checks: {mapings: {}}\n", "checks.mapings", "no check named 'mapings'"),
    (GOOD + "checks: {mapping: {tolerance: high}}\n", "checks.mapping.tolerance",
     "expected a number"),
    (GOOD + "checks: {energy: {tolernce_db: 1}}\n", "checks.energy.tolernce_db",
     "known options: nominal, tolerance_db"),
    (GOOD.replace("adapter: python", "adapter: pyhton"), "adapter", "no adapter named 'pyhton'"),
    (GOOD.replace("target: devices/modems.py:Qpsk3gpp\n", ""), "target", "missing key 'target'"),
    ("- just\n- a list\n", None, "expected a mapping of keys at the top level"),
    ("name: [unclosed\n", None, "not valid YAML: line"),
])
def test_errors_name_file_key_and_expectation(tmp_path, text, key, words):
    path = write(tmp_path, text)
    with pytest.raises(ConfigError) as info:
        load_device(path)
    err = info.value
    assert (err.file, err.key) == (str(path), key)
    msg = str(err)
    # "<file>: <key>: <what was found and what was expected>", or "<file>: ..." with no key
    assert msg.startswith(f"{path}: {key}: " if key else f"{path}: "), msg
    assert words in err.raw_message, msg


def test_missing_file():
    with pytest.raises(ConfigError, match="no such device file"):
        load_device("nowhere/dev.yaml")


def test_yaml_is_data_only(tmp_path):
    # yaml.safe_load: a python tag is rejected, never executed
    path = write(tmp_path, GOOD + "params: !!python/object/apply:os.system ['echo hi']\n")
    with pytest.raises(ConfigError, match="not valid YAML"):
        load_device(path)
