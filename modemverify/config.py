"""Device files: load, validate, and turn into a :class:`DeviceSpec`.

A device file is data, read with ``yaml.safe_load`` only. Every key is validated before any
vector is drawn; a problem raises :class:`~modemverify.errors.ConfigError` naming the file, the
dotted key, the value found and what was expected.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import yaml

from .adapters.registry import get_adapter_class
from .dsp.pulses import PULSE_SHAPES, PulseShape
from .errors import ConfigError, UnknownNameError
from .oracles import validate_checks
from .options import Opt, validate_options
from .schemes.conventions import CONVENTIONS, MODULATIONS, get_convention
from .spec import DEFAULT_TIMEOUT_S, DeviceSpec, SchemeSpec

#: top-level keys every device file may have, with their descriptions (README reference)
COMMON_KEYS: dict[str, str] = {
    "name": "free text naming the device (required)",
    "description": "free text",
    "adapter": "which adapter wraps the device: python, reference, or a plugin (required)",
    "target": "for the python adapter: FILE.py:NAME or package.module:NAME",
    "params": "keyword arguments for the target callable",
    "scheme": "the modulation and convention the device claims (required)",
    "checks": "which checks, with what limits; every check that applies runs unless set to false",
    "fail_on_inconclusive": "true: an inconclusive verdict fails the run (default false)",
    "isolate": "run the device in a worker process, so that a crash or a hang becomes an error "
               "verdict (default: false for python and reference, true for sharedlib and process)",
    "timeout_s": "per-call timeout in seconds for a device out of the harness's process "
                 "(default 10)",
}

SCHEME_OPTIONS: dict[str, Opt] = {
    "modulation": Opt("choice", None, "modulation", choices=tuple(MODULATIONS)),
    "convention": Opt("choice", None, "labelling the device claims", choices=CONVENTIONS),
    "samples_per_symbol": Opt("int", 1, "samples per symbol at the device's output", minimum=1),
    "llr_positive_bit": Opt("choice", 0, "the bit a positive LLR stands for", choices=(0, 1)),
    "pulse": Opt("mapping", None, "pulse shape: {shape: rrc|rc|rectangular|gaussian, "
                 "rolloff, span, bt} (default rectangular)"),
    "alignment": Opt("mapping", None, "which corrections may be applied to the device's "
                     "waveform: {delay, phase, frequency} (default: all with a pulse or more "
                     "than one sample per symbol, none otherwise)"),
}

PULSE_OPTIONS: dict[str, Opt] = {
    "shape": Opt("choice", "rectangular", "pulse shape",
                 choices=PULSE_SHAPES),
    "rolloff": Opt("number", None, "roll-off factor (rrc, rc)", minimum=0, maximum=1),
    "span": Opt("int", None, "filter span in symbols (rrc, rc, gaussian)", minimum=1),
    "bt": Opt("number", None, "bandwidth-time product (gaussian)", minimum=0,
              exclusive_minimum=True),
}

ALIGNMENT_OPTIONS: dict[str, Opt] = {
    "delay": Opt("bool", True, "estimate and remove the device's delay (integer and fractional)"),
    "phase": Opt("bool", True, "remove a constant phase rotation smaller than half the "
                 "constellation's symmetry angle (larger ones stay: they are mapping defects)"),
    "frequency": Opt("bool", True, "estimate and remove a small carrier frequency offset"),
}


def load_device(path: str | Path) -> DeviceSpec:
    """Read and validate a device file."""
    path = Path(path)
    file = str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError("no such device file", file=file) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"cannot read the device file ({exc})", file=file) from None
    try:
        data = yaml.safe_load(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark else ""
        problem = getattr(exc, "problem", None) or str(exc)
        raise ConfigError(f"not valid YAML: {where}{problem}", file=file) from None
    return parse_device(data, file=file, base_dir=path.resolve().parent)


def parse_device(data: Any, *, file: str | None = None,
                 base_dir: Path | None = None) -> DeviceSpec:
    """Validate an already-parsed device mapping (see :func:`load_device`)."""
    if not isinstance(data, dict):
        raise ConfigError(f"expected a mapping of keys at the top level, found "
                          f"{type(data).__name__}", file=file)
    for required in ("name", "adapter", "scheme"):
        if required not in data:
            raise ConfigError(f"missing key {required!r}: {COMMON_KEYS[required]}", file=file,
                              key=required)
    name = data["name"]
    if not isinstance(name, str) or not name.strip():
        raise ConfigError(f"name={name!r}: expected non-empty text", file=file, key="name")
    adapter_name = data["adapter"]
    if not isinstance(adapter_name, str):
        raise ConfigError(f"adapter={adapter_name!r}: expected an adapter name", file=file,
                          key="adapter")
    try:
        adapter_cls = get_adapter_class(adapter_name)
    except UnknownNameError as exc:
        raise UnknownNameError("adapter", adapter_name, exc.known, file=file,
                               key="adapter") from None

    allowed = set(COMMON_KEYS) | set(adapter_cls.config_keys)
    unknown = sorted(set(data) - allowed, key=str)
    if unknown:
        raise ConfigError(f"unknown key {unknown[0]!r}; keys for adapter {adapter_name!r}: "
                          f"{', '.join(sorted(allowed))}", file=file, key=str(unknown[0]))

    scheme = _parse_scheme(data["scheme"], file)
    params = data.get("params") or {}
    if not isinstance(params, dict):
        raise ConfigError(f"params={params!r}: expected a mapping of keyword arguments",
                          file=file, key="params")
    target = data.get("target")
    if target is not None and not isinstance(target, str):
        raise ConfigError(f"target={target!r}: expected text such as modem.py:Modem",
                          file=file, key="target")
    fail_inc = data.get("fail_on_inconclusive", False)
    if not isinstance(fail_inc, bool):
        raise ConfigError(f"fail_on_inconclusive={fail_inc!r}: expected true or false",
                          file=file, key="fail_on_inconclusive")
    isolate = data.get("isolate", adapter_cls.isolate_default)
    if not isinstance(isolate, bool):
        raise ConfigError(f"isolate={isolate!r}: expected true or false", file=file, key="isolate")
    timeout_s = Opt("number", DEFAULT_TIMEOUT_S, "", minimum=0, exclusive_minimum=True).validate(
        data.get("timeout_s", DEFAULT_TIMEOUT_S), file=file, key="timeout_s")
    if "timeout_s" in data and not (isolate or adapter_cls.isolates_itself):
        # a call in the harness's own process cannot be interrupted safely
        raise ConfigError(f"timeout_s={data['timeout_s']!r} needs isolate: true (a device in the "
                          f"harness's own process cannot be stopped)", file=file, key="timeout_s")
    description = data.get("description", "")
    if not isinstance(description, str):
        raise ConfigError(f"description={description!r}: expected text", file=file,
                          key="description")
    spec = DeviceSpec(
        name=name.strip(), adapter=adapter_name, scheme=scheme, target=target, params=params,
        checks={}, fail_on_inconclusive=fail_inc, isolate=isolate, timeout_s=timeout_s,
        description=description, file=file,
        base_dir=base_dir or Path.cwd(),
        extra={k: data[k] for k in adapter_cls.config_keys if k in data})
    spec.checks = validate_checks(data.get("checks"), spec, file=file)
    adapter_cls.validate_spec(spec)
    return spec


def _parse_scheme(raw: Any, file: str | None) -> SchemeSpec:
    if not isinstance(raw, dict):
        raise ConfigError(f"scheme={raw!r}: expected a mapping with modulation and convention",
                          file=file, key="scheme")
    for required in ("modulation", "convention"):
        if required not in raw:
            raise ConfigError(f"missing key {required!r}; expected one of "
                              f"{', '.join(SCHEME_OPTIONS[required].choices)}",
                              file=file, key=f"scheme.{required}")
    raw = dict(raw)
    tail = raw.pop("tail_samples", "auto")  # a number or "auto": checked below
    if isinstance(raw.get("modulation"), str):
        raw["modulation"] = raw["modulation"].lower()
    opts = validate_options(SCHEME_OPTIONS, raw, file=file, key="scheme")
    try:
        get_convention(opts["convention"], opts["modulation"])
    except ConfigError as exc:
        raise ConfigError(f"convention={opts['convention']!r}: {exc.raw_message}", file=file,
                          key="scheme.convention") from None
    sps = opts["samples_per_symbol"]
    popts = validate_options(PULSE_OPTIONS, opts["pulse"], file=file, key="scheme.pulse")
    try:
        pulse = PulseShape(popts["shape"], sps, rolloff=popts["rolloff"], span=popts["span"],
                           bt=popts["bt"])
    except ConfigError as exc:
        raise ConfigError(exc.raw_message, file=file,
                          key="scheme.pulse" + (f".{exc.key}" if exc.key else "")) from None
    shaped = sps > 1 or not pulse.is_rectangular
    if tail == "auto":
        tail = 0 if pulse.is_rectangular else None
    elif isinstance(tail, bool) or not isinstance(tail, int) or tail < 0:
        raise ConfigError(f"tail_samples={tail!r}: expected a whole number >= 0 or auto",
                          file=file, key="scheme.tail_samples")
    defaults = {name: shaped for name in ALIGNMENT_OPTIONS}
    given = opts["alignment"] or {}
    align = validate_options(ALIGNMENT_OPTIONS, given, file=file, key="scheme.alignment")
    align = {name: (align[name] if name in given else defaults[name]) for name in align}
    return SchemeSpec(modulation=opts["modulation"], convention=opts["convention"],
                      samples_per_symbol=sps, llr_positive_bit=opts["llr_positive_bit"],
                      pulse=pulse, tail_samples=tail, alignment=align)
