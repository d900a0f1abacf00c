"""Third-party adapters through the entry-point group ``modemverify.adapters``.

The plugin is "installed" the way an installer leaves a package: a module and a
``*.dist-info`` folder with ``entry_points.txt`` in a folder on ``sys.path`` (the entry-point
file format of the Python packaging specifications). Its device is TS 38.211 5.1.3 QPSK.
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import pytest
from _cmodems import write_device

from modemverify.adapters.registry import ENTRY_POINT_GROUP, available_adapters
from modemverify.config import load_device, parse_device
from modemverify.errors import ConfigError, UnknownNameError
from modemverify.runner import check

PLUGIN = '''
import numpy as np
from modemverify.adapters.base import ModemAdapter
from modemverify.errors import ConfigError


class TinyAdapter(ModemAdapter):
    """A loopback QPSK (TS 38.211 5.1.3) whose amplitude the device file sets."""

    adapter_id = "tiny"
    config_keys = {"amplitude": "peak I and Q value (default 1/sqrt(2))"}
    capabilities = frozenset({"modulate", "demodulate"})

    def __init__(self, amplitude):
        self.amplitude = amplitude

    @classmethod
    def validate_spec(cls, spec):
        a = spec.extra.get("amplitude", 0.7071067811865476)
        if not isinstance(a, float) or a <= 0:
            raise ConfigError(f"amplitude={a!r}: expected a positive number", file=spec.file,
                              key="amplitude")

    @classmethod
    def from_spec(cls, spec):
        return cls(spec.extra.get("amplitude", 0.7071067811865476))

    def modulate(self, bits):
        b = bits.reshape(-1, 2).astype(float)
        return self.amplitude * ((1 - 2 * b[:, 0]) + 1j * (1 - 2 * b[:, 1]))

    def demodulate(self, samples):
        return np.stack([samples.real < 0, samples.imag < 0], axis=1).astype(np.uint8).ravel()


class BareAdapter(ModemAdapter):
    """A modulator only, with no capabilities declared, whose I and Q arms are swapped:
    b(2i) drives Q and b(2i+1) drives I, against TS 38.211 5.1.3."""

    adapter_id = "tiny-bare"

    @classmethod
    def from_spec(cls, spec):
        return cls()

    def modulate(self, bits):
        b = bits.reshape(-1, 2).astype(float)
        return ((1 - 2 * b[:, 1]) + 1j * (1 - 2 * b[:, 0])) / np.sqrt(2)


class NotAnAdapter:
    pass
'''

ENTRY_POINTS = f"""
[{ENTRY_POINT_GROUP}]
tiny = mv_tiny_plugin:TinyAdapter
tiny-broken = mv_tiny_missing_module:Adapter
tiny-notadapter = mv_tiny_plugin:NotAnAdapter
tiny-bare = mv_tiny_plugin:BareAdapter
"""


@pytest.fixture
def plugin_dir(tmp_path, monkeypatch):
    site = tmp_path / "site"
    site.mkdir()
    (site / "mv_tiny_plugin.py").write_text(PLUGIN)
    info = site / "mv_tiny_plugin-0.1.dist-info"
    info.mkdir()
    (info / "METADATA").write_text("Metadata-Version: 2.1\nName: mv-tiny-plugin\nVersion: 0.1\n")
    (info / "entry_points.txt").write_text(textwrap.dedent(ENTRY_POINTS))
    monkeypatch.syspath_prepend(str(site))
    monkeypatch.delenv("MODEMVERIFY_NO_PLUGINS", raising=False)
    return site


def spec_data(**extra):
    return {"name": "tiny-dut", "adapter": "tiny",
            "scheme": {"modulation": "qpsk", "convention": "3gpp"},
            "checks": {"ber": False, "llr": False}, **extra}


def test_installed_plugin_is_listed_and_runs(plugin_dir):
    assert {"tiny", "python", "sharedlib", "process", "recorded"} <= set(available_adapters())
    result = check(parse_device(spec_data()))
    assert result.ok, [(v.name, v.reason) for v in result.verdicts]


def test_plugin_keys_are_allowed_and_validated(plugin_dir):
    spec = parse_device(spec_data(amplitude=1.0))
    assert spec.extra == {"amplitude": 1.0}
    v = {x.name: x for x in check(spec).verdicts}
    assert v["energy"].outcome == "fail"  # amplitude 1 per arm: Es = 2, +3 dB
    with pytest.raises(ConfigError) as info:
        parse_device(spec_data(amplitude=-1.0), file="tiny.yaml")
    assert info.value.key == "amplitude" and info.value.file == "tiny.yaml"
    with pytest.raises(ConfigError) as info:
        parse_device(spec_data(gain=2.0))
    assert "unknown key 'gain'" in str(info.value) and "amplitude" in str(info.value)


@pytest.mark.parametrize("isolate", [False, True])
def test_capabilities_follow_the_operations_a_plugin_implements(plugin_dir, isolate):
    # a plugin that implements modulate and says nothing else is judged on its modulate: the
    # swapped arms fail mapping (for QPSK the same as reversing the two bits), and roundtrip
    # runs the device's modulator into the reference's demodulator, not reference -> reference
    result = check(parse_device(spec_data(adapter="tiny-bare", isolate=isolate)))
    v = {x.name: x for x in result.verdicts}
    assert v["mapping"].outcome == "fail"
    assert "I and Q arms swapped" in v["mapping"].reason
    assert v["roundtrip"].outcome == "fail"
    assert "device modulate -> reference demodulate" in v["roundtrip"].reason
    assert v["length.modulate"].outcome == "pass"


def test_plugin_runs_isolated_in_a_worker(plugin_dir):
    result = check(parse_device(spec_data(isolate=True)))
    assert result.ok, [(v.name, v.reason) for v in result.verdicts]


def test_broken_plugins_are_named(plugin_dir):
    with pytest.raises(ConfigError, match=r"'tiny-broken' \(mv_tiny_missing_module:Adapter\) "
                                          r"failed to load: ModuleNotFoundError"):
        parse_device(spec_data(adapter="tiny-broken"))
    with pytest.raises(ConfigError, match="is not a ModemAdapter subclass"):
        parse_device(spec_data(adapter="tiny-notadapter"))


def test_plugins_can_be_turned_off(plugin_dir, monkeypatch):
    monkeypatch.setenv("MODEMVERIFY_NO_PLUGINS", "1")
    with pytest.raises(UnknownNameError) as info:
        parse_device(spec_data(), file="tiny.yaml")
    assert "no adapter named 'tiny'" in str(info.value)
    assert "sharedlib" in info.value.known and "tiny" not in info.value.known


def test_plugin_from_the_command_line(plugin_dir, tmp_path):
    path = write_device(tmp_path, "tiny", {k: v for k, v in spec_data().items() if k != "name"})
    load_device(path)
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(plugin_dir)] + sys.path)}
    proc = subprocess.run([sys.executable, "-m", "modemverify.cli", "check", str(path)],
                          capture_output=True, text=True, timeout=120, env=env)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "[tiny, qpsk (3gpp)" in proc.stdout
