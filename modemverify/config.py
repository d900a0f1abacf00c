"""Device files: load, validate, and turn into a :class:`DeviceSpec`.

A device file is data, read as plain YAML only (no duplicate keys, no aliases). Every key is
validated before any vector is drawn; a problem raises :class:`~modemverify.errors.ConfigError`
naming the file, the dotted key, the value found and what was expected. """

from __future__ import annotations

import hashlib
from pathlib import Path
from typing import Any

from .adapters.registry import get_adapter_class
from .datafile import read_yaml
from .dsp.pulses import PULSE_SHAPES, PulseShape
from .errors import ConfigError, UnknownNameError
from .options import Opt, validate_options
from .oracles import validate_checks
from .schemes.conventions import CONVENTIONS, MODULATIONS, RING_RATIOS, get_convention
from .spec import DEFAULT_TIMEOUT_S, DeviceSpec, SchemeSpec

__all__ = [
    "COMMON_OPTIONS", "EXECUTION_OPTIONS", "SCHEME_OPTIONS", "PULSE_OPTIONS", "ALIGNMENT_OPTIONS", "load_device",
    "parse_device", "MAX_SAMPLES_PER_SYMBOL",
]


def _non_empty(text: str) -> str | None:
    return None if text.strip() else "expected non-empty text"


#: largest samples per symbol a device file may declare
MAX_SAMPLES_PER_SYMBOL = 256

#: top-level keys every device file may have (an adapter adds its own: ``config_keys``)
COMMON_OPTIONS: dict[str, Opt] = {
    "name": Opt("str", None, "free text naming the device (required)", required=True,
                expected="non-empty text", check=_non_empty),
    "description": Opt("str", "", "free text, shown in the report"),
    "adapter": Opt("str", None, "which adapter wraps the device: python, reference, sharedlib, "
                   "process, recorded or a plugin (required)", required=True,
                   expected="an adapter name"),
    "target": Opt("str", None, "for the python adapter: FILE.py:NAME or package.module:NAME",
                  expected="text such as modem.py:Modem"),
    "params": Opt("mapping", {}, "keyword arguments for the target callable", also=(None,),
                  expected="a mapping of keyword arguments"),
    "scheme": Opt("mapping", None, "the modulation and convention the device claims (required)",
                  required=True, expected="a mapping with modulation and convention"),
    "checks": Opt("mapping", None, "which checks, with what limits; every check that applies "
                  "runs unless set to false", also=(None,),
                  expected="a mapping of check names to options (or false to turn a check "
                           "off)"),
    "fail_on_inconclusive": Opt("bool", False, "true: an inconclusive verdict fails the run"),
    "isolate": Opt("bool", None, "run the device in a worker process, so that a crash or a "
                   "hang becomes an error verdict (default: false for python, reference and "
                   "recorded, true for sharedlib; process always runs its own process)"),
    "timeout_s": Opt("number", DEFAULT_TIMEOUT_S, "per-call timeout in seconds for a device "
                     "out of the harness's process (at most an hour)", minimum=0,
                     exclusive_minimum=True, maximum=3600),
    "execution": Opt("mapping", None, "where the BER check's blocks run: {workers, cluster, "
                     "upload, time_budget_s} (default: one process)", also=(None,)),
}

#: keys of ``execution:`` (the command line's --workers, --cluster and --time-budget win)
EXECUTION_OPTIONS: dict[str, Opt] = {
    "workers": Opt("int", 1, "worker processes for the BER check's blocks (auto: the cores "
                   "available)", minimum=1, maximum=1024, also=("auto",)),
    "cluster": Opt("str", None, "a Dask scheduler address (tcp://host:8786), or local for a "
                   "LocalCluster of the workers; needs pip install 'modemverify[cluster]'",
                   expected="an address such as tcp://host:8786, or local", check=_non_empty),
    "upload": Opt("bool", False, "upload a single-file python target to the cluster's workers"),
    "time_budget_s": Opt("number", None, "warn when the BER check will likely take longer "
                         "than this many seconds", minimum=0, exclusive_minimum=True),
}

SCHEME_OPTIONS: dict[str, Opt] = {
    "modulation": Opt("choice", None, "the modulation (required): "
                      + ", ".join(MODULATIONS), choices=tuple(MODULATIONS), required=True),
    "convention": Opt("choice", None, "the labelling the device claims (required): "
                      + ", ".join(CONVENTIONS), choices=CONVENTIONS, required=True),
    "ring_ratio": Opt("numbers", None, "APSK only: each ring's radius over the inner ring's, "
                      "increasing, above 1 (16APSK one number, 32APSK two; default: from "
                      "code_rate, or that of rate 2/3 / 3/4)", minimum=1, exclusive_minimum=True),
    "code_rate": Opt("choice", None, "APSK only: the DVB-S2 code rate that fixes the ring "
                     "ratios (ETSI EN 302 307-1 Tables 9 and 10): "
                     + ", ".join(sorted({r for t in RING_RATIOS.values() for r in t})),
                     choices=tuple(sorted({r for t in RING_RATIOS.values() for r in t}))),
    # bounded so that the largest block a check sends (2^17 bits of BPSK) stays a few hundred
    # MB of complex128 samples: 2^17 symbols x 256 samples x 16 bytes = 512 MiB
    "samples_per_symbol": Opt("int", 1, "samples per symbol at the device's output (1 to 256)",
                              minimum=1, maximum=MAX_SAMPLES_PER_SYMBOL),
    "llr_positive_bit": Opt("choice", 0, "the bit a positive LLR stands for", choices=(0, 1)),
    "pulse": Opt("mapping", None, "pulse shape: {shape: rrc|rc|rectangular|gaussian, "
                 "rolloff, span, bt} (default rectangular)"),
    "tail_samples": Opt("int", "auto", "samples the device's modulate output has beyond "
                        "n x samples_per_symbol (default auto: 0 without a pulse, any constant "
                        "with one)", minimum=0, also=("auto",)),
    "alignment": Opt("mapping", None, "which corrections may be applied to the device's "
                     "waveform: {delay, phase, frequency} (default: all with a pulse or more "
                     "than one sample per symbol, none otherwise)"),
    "streaming": Opt("bool", False, "the device keeps state between calls (filter memory, a "
                     "differential reference, a position counter): calls in chunks must equal "
                     "one call on the whole (the streaming check)"),
}

PULSE_OPTIONS: dict[str, Opt] = {
    "shape": Opt("choice", "rectangular", "pulse shape",
                 choices=PULSE_SHAPES),
    "rolloff": Opt("number", None, "roll-off factor (rrc, rc)", minimum=0, maximum=1),
    "span": Opt("int", None, "filter span in symbols (rrc, rc, gaussian; 1 to 256)", minimum=1,
                maximum=256),
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
    """Read and validate a device file (plain YAML data: see :mod:`modemverify.datafile`)."""
    path = Path(path)
    data = read_yaml(path, what="device file")
    spec = parse_device(data, file=str(path), base_dir=path.resolve().parent)
    spec.sha256 = hashlib.sha256(path.read_bytes()).hexdigest()
    return spec


def parse_device(data: Any, *, file: str | None = None,
                 base_dir: Path | None = None) -> DeviceSpec:
    """Validate an already-parsed device mapping (see :func:`load_device`)."""
    if not isinstance(data, dict):
        raise ConfigError(f"expected a mapping of keys at the top level, found "
                          f"{type(data).__name__}", file=file)
    for name in ("name", "adapter"):  # the adapter says which other keys there may be
        if name not in data:
            raise ConfigError(f"missing key {name!r}: {COMMON_OPTIONS[name].help}", file=file,
                              key=name)
        COMMON_OPTIONS[name].validate(data[name], file=file, key=name)
    adapter_name = data["adapter"]
    try:
        adapter_cls = get_adapter_class(adapter_name)
    except UnknownNameError as exc:
        raise UnknownNameError("adapter", adapter_name, exc.known, file=file,
                               key="adapter") from None
    own = {k: (o if isinstance(o, Opt) else Opt("any", None, o))
           for k, o in adapter_cls.config_keys.items()}
    table = {**COMMON_OPTIONS, **own}
    unknown = sorted(set(data) - set(table), key=str)
    if unknown:
        raise ConfigError(f"unknown key {unknown[0]!r}; keys for adapter {adapter_name!r}: "
                          f"{', '.join(sorted(table))}", file=file, key=str(unknown[0]))
    opts = validate_options(table, data, file=file, key="")
    isolate = adapter_cls.isolate_default if opts["isolate"] is None else opts["isolate"]
    if "timeout_s" in data and not (isolate or adapter_cls.isolates_itself):
        # a call in the harness's own process cannot be interrupted safely
        raise ConfigError(f"timeout_s={data['timeout_s']!r} needs isolate: true (a device in the "
                          f"harness's own process cannot be stopped)", file=file, key="timeout_s")
    spec = DeviceSpec(
        name=opts["name"].strip(), adapter=adapter_name, scheme=_parse_scheme(opts["scheme"], file),
        target=opts["target"], params=opts["params"] or {}, checks={},
        fail_on_inconclusive=opts["fail_on_inconclusive"], isolate=isolate,
        timeout_s=opts["timeout_s"], description=opts["description"], file=file,
        base_dir=base_dir or Path.cwd(), extra={k: opts[k] for k in own if k in data},
        execution=validate_options(EXECUTION_OPTIONS, opts["execution"], file=file,
                                   key="execution"))
    spec.checks = validate_checks(opts["checks"], spec, file=file)
    adapter_cls.validate_spec(spec)
    return spec


def _parse_scheme(raw: Any, file: str | None) -> SchemeSpec:
    raw = dict(raw)
    if isinstance(raw.get("modulation"), str):
        raw["modulation"] = raw["modulation"].lower()
    opts = validate_options(SCHEME_OPTIONS, raw, file=file, key="scheme")
    ring = opts["ring_ratio"]
    for key in ("ring_ratio", "code_rate"):
        if opts[key] is not None and not opts["modulation"].endswith("apsk"):
            raise ConfigError(f"{key}={opts[key]!r}: only an APSK modulation has a ring ratio, "
                              f"not {opts['modulation']}", file=file, key=f"scheme.{key}")
    if opts["code_rate"] is not None:
        if ring is not None:
            raise ConfigError(f"ring_ratio={ring!r} and code_rate={opts['code_rate']!r}: give "
                              f"one (the code rate fixes the ring ratio)", file=file,
                              key="scheme.ring_ratio")
        rates = RING_RATIOS[opts["modulation"]]
        if opts["code_rate"] not in rates:
            raise ConfigError(f"code_rate={opts['code_rate']!r}: DVB-S2 {opts['modulation']} "
                              f"has the code rates {', '.join(rates)}", file=file,
                              key="scheme.code_rate")
        ring = rates[opts["code_rate"]]
    if ring is not None:
        ring = tuple(ring)
        try:
            get_convention("dvb-s2", opts["modulation"], ring)
        except ConfigError as exc:
            raise ConfigError(exc.raw_message, file=file, key="scheme.ring_ratio") from None
    try:
        get_convention(opts["convention"], opts["modulation"], ring)
    except ConfigError as exc:
        raise ConfigError(f"convention={opts['convention']!r}: {exc.raw_message}", file=file,
                          key="scheme.convention") from None
    sps = opts["samples_per_symbol"]
    rule = get_convention(opts["convention"], opts["modulation"], ring).rule
    if rule.q_delay and (sps < 2 or (rule.q_delay * sps) % 1):
        raise ConfigError(f"samples_per_symbol={sps}: {opts['modulation']} delays the Q arm by "
                          f"{rule.q_delay:g} symbol, a property of the waveform: expected an "
                          f"even number of samples per symbol, 2 or more", file=file,
                          key="scheme.samples_per_symbol")
    popts = validate_options(PULSE_OPTIONS, opts["pulse"], file=file, key="scheme.pulse")
    try:
        pulse = PulseShape(popts["shape"], sps, rolloff=popts["rolloff"], span=popts["span"],
                           bt=popts["bt"])
    except ConfigError as exc:
        raise ConfigError(exc.raw_message, file=file,
                          key="scheme.pulse" + (f".{exc.key}" if exc.key else "")) from None
    shaped = sps > 1 or not pulse.is_rectangular
    tail = opts["tail_samples"]
    if tail == "auto":
        tail = 0 if pulse.is_rectangular else None
    defaults = {name: shaped for name in ALIGNMENT_OPTIONS}
    given = opts["alignment"] or {}
    align = validate_options(ALIGNMENT_OPTIONS, given, file=file, key="scheme.alignment")
    align = {name: (align[name] if name in given else defaults[name]) for name in align}
    return SchemeSpec(modulation=opts["modulation"], convention=opts["convention"],
                      ring_ratio=ring, samples_per_symbol=sps,
                      llr_positive_bit=opts["llr_positive_bit"],
                      pulse=pulse, tail_samples=tail, alignment=align,
                      streaming=opts["streaming"])
