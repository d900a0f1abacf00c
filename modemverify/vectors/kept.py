"""Counterexamples kept with a report, replayed first by the next run, exported as vectors.

A check that finds a concrete failing input (``roundtrip``, ``streaming.modulate``,
``streaming.demodulate``) puts it in its verdict's details as a
:class:`~modemverify.records.CounterexampleRecord`. With ``--report DIR`` the run keeps them in
``DIR/counterexamples/<device>.json``::

    {"format": "modemverify-counterexamples", "version": 1,
     "device": "port-v2", "scheme": {"modulation": "qpsk", "convention": "3gpp",
                                     "samples_per_symbol": 1, "pulse": "rectangular"},
     "counterexamples": [
       {"verdict": "roundtrip", "bits": "0001", "last": "fail", "seed": 1},
       {"verdict": "streaming.modulate", "bits": "0100", "chunks": [1, 1], "last": "pass",
        "seed": 1}]}

``last`` is the outcome the verdict had when the input was last tried. A later run with the
same report folder reads the file of each device (by its name) before it starts and gives each
check its kept inputs (``Bench.kept``), which the check tries before it draws new ones and
names in its reason ("tried the 2 kept counterexamples first: still failing"); afterwards the
file holds every input kept so far (none is forgotten, so a defect that comes back is found at
once), each with its latest outcome. A file for another scheme is not replayed (the run says
so); a file that is not what this module writes is refused, naming it.

:func:`kept_vector_set` turns a device's failing inputs into a vector set
(:mod:`~modemverify.vectors.recording`): one segment per counterexample, with the samples the
claimed convention gives for its bits (the reference modem; symbols held for
``samples_per_symbol`` samples, or at one sample per symbol when the device declares a pulse,
which a vector set's segments cannot hold), for ``modemverify vectors export --from-report``.
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._version import __version__
from ..errors import ConfigError
from ..schemes.conventions import MODULATIONS, get_convention
from ..schemes.reference import ReferenceModem
from .recording import Segment, VectorSet, write_vector_set

__all__ = [
    "KEPT_FORMAT", "KEPT_VERSION", "KEPT_FOLDER", "KeptSet", "kept_path", "read_kept",
    "load_kept", "kept_of_results", "kept_vector_set", "export_kept", "bits_of",
]

KEPT_FORMAT = "modemverify-counterexamples"
KEPT_VERSION = 1
#: the folder of a report that holds them
KEPT_FOLDER = "counterexamples"


def _slug(name: str) -> str:
    """A device name as a file name: ``Tern port/v2`` -> ``Tern-port-v2``."""
    return re.sub(r"[^A-Za-z0-9._-]+", "-", name).strip("-.") or "device"


def kept_path(report: str | Path, device_name: str) -> Path:
    return Path(report) / KEPT_FOLDER / f"{_slug(device_name)}.json"


def bits_of(text: str) -> np.ndarray:
    """``"0101"`` -> uint8 bits."""
    return (np.frombuffer(text.encode("ascii"), dtype=np.uint8) - ord("0")).astype(np.uint8)


@dataclass
class KeptSet:
    """The counterexamples kept for one device (``entries`` as in the file)."""

    device: str
    scheme: dict
    entries: list[dict] = field(default_factory=list)
    path: Path | None = None

    def by_verdict(self) -> dict[str, list[dict]]:
        """{verdict name: [CounterexampleRecord, ...]}, as a check reads them."""
        out: dict[str, list[dict]] = {}
        for e in self.entries:
            rec = {"verdict": e["verdict"], "bits": e["bits"]}
            if "chunks" in e:
                rec["chunks"] = list(e["chunks"])
            out.setdefault(e["verdict"], []).append(rec)
        return out

    def failing(self) -> list[dict]:
        return [e for e in self.entries if e.get("last") == "fail"]

    def to_json(self) -> dict:
        return {"format": KEPT_FORMAT, "version": KEPT_VERSION, "device": self.device,
                "scheme": self.scheme, "modemverify": __version__,
                "counterexamples": self.entries}


def _scheme_of(spec) -> dict:
    s = spec.scheme
    return {"modulation": s.modulation, "convention": s.convention,
            "samples_per_symbol": int(s.samples_per_symbol),
            "pulse": "rectangular" if s.pulse.is_rectangular else s.pulse.describe()}


def _bad(path: Path, what: str) -> ConfigError:
    return ConfigError(f"{path}: {what}; expected a file written by modemverify check "
                       f"--report (format {KEPT_FORMAT}, version {KEPT_VERSION})")


def read_kept(path: str | Path) -> KeptSet:
    """Read one kept file (ConfigError naming it when it is not one)."""
    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        raise _bad(path, f"cannot be read as JSON ({exc})") from None
    if not isinstance(data, dict) or data.get("format") != KEPT_FORMAT:
        raise _bad(path, "is not a counterexample file")
    if data.get("version") != KEPT_VERSION:
        raise _bad(path, f"has version {data.get('version')!r}")
    scheme, entries = data.get("scheme"), data.get("counterexamples")
    if not isinstance(scheme, dict) or scheme.get("modulation") not in MODULATIONS or \
            not isinstance(entries, list):
        raise _bad(path, "has no scheme with a known modulation, or no counterexample list")
    k = MODULATIONS[scheme["modulation"]]
    for i, e in enumerate(entries):
        bits = e.get("bits") if isinstance(e, dict) else None
        ok = (isinstance(bits, str) and bits and set(bits) <= {"0", "1"}
              and len(bits) % k == 0 and isinstance(e.get("verdict"), str))
        chunks = e.get("chunks") if ok else None
        if ok and chunks is not None:
            ok = (isinstance(chunks, list) and all(isinstance(c, int) and c >= 1
                                                   for c in chunks)
                  and sum(chunks) * k == len(bits))
        if not ok:
            raise _bad(path, f"counterexamples[{i}] is not {{verdict, bits (0/1, whole "
                             f"symbols of {k} bits), chunks (symbols adding up to them)}}")
    return KeptSet(str(data.get("device", "")), scheme, entries, path)


def load_kept(report: str | Path | None, spec) -> tuple[KeptSet, str | None]:
    """The kept set of ``spec``'s device in a report folder (empty when there is none), and a
    note when a file is there but for another scheme (it is then not replayed, and the run
    starts a new one)."""
    fresh = KeptSet(spec.name, _scheme_of(spec))
    if report is None:
        return fresh, None
    path = kept_path(report, spec.name)
    if not path.exists():
        return fresh, None
    kept = read_kept(path)
    want = _scheme_of(spec)
    mismatch = [k for k in ("modulation", "convention") if kept.scheme.get(k) != want[k]]
    if mismatch:
        return fresh, (f"kept counterexamples in {path} are for "
                       f"{kept.scheme.get('modulation')} ({kept.scheme.get('convention')}), "
                       f"not {want['modulation']} ({want['convention']}): not replayed "
                       f"(this run's counterexamples, if any, replace them)")
    kept.scheme = want
    return kept, None


def _key(e: dict) -> tuple:
    return (e["verdict"], e["bits"], tuple(e.get("chunks", ())))


def kept_of_results(kept: KeptSet, verdicts, seed: int) -> KeptSet:
    """``kept`` updated with a run's verdicts: every input kept before, with the outcome it had
    when its check tried it now (``details["kept"]``, a KeptRecord), then each new
    counterexample (``details["counterexample"]`` of a failing verdict)."""
    judged = {v.name: v for v in verdicts if v.outcome in ("pass", "fail")}
    entries, seen, index = [], set(), {}
    for e in kept.entries:
        i = index.get(e["verdict"], 0)
        index[e["verdict"]] = i + 1
        v = judged.get(e["verdict"])
        tried = (v.details or {}).get("kept") if v is not None else None
        if tried is not None and i < tried["tried"]:
            e = {**e, "last": "fail" if i in tried["failing"] else "pass"}
        entries.append(e)
        seen.add(_key(e))
    for v in verdicts:
        rec = (v.details or {}).get("counterexample")
        if v.outcome == "fail" and rec and _key(rec) not in seen:
            entries.append({**rec, "last": "fail", "seed": int(seed)})
            seen.add(_key(rec))
    return KeptSet(kept.device, kept.scheme, entries, kept.path)


def kept_vector_set(kept: KeptSet, *, only_failing: bool = True) -> VectorSet | None:
    """The kept inputs (the failing ones by default) as a vector set, or None if there are
    none."""
    entries = kept.failing() if only_failing else kept.entries
    if not entries:
        return None
    mod, conv_name = kept.scheme["modulation"], kept.scheme["convention"]
    conv = get_convention(conv_name, mod)
    shaped = kept.scheme.get("pulse", "rectangular") != "rectangular"
    sps = 1 if shaped else int(kept.scheme.get("samples_per_symbol", 1))
    ref = ReferenceModem(conv, sps)
    k = conv.bits_per_symbol
    segments = []
    for i, e in enumerate(entries, 1):
        bits = bits_of(e["bits"])
        how = (f"feed as {len(e['chunks'])} calls of {' + '.join(map(str, e['chunks']))} "
               f"symbols; together they must give these samples" if "chunks" in e else
               "one call")
        segments.append(Segment(f"{e['verdict']}-{i}", bits, ref.modulate(bits),
                                f"failed {e['verdict']} ({bits.size // k} symbols): {how}"))
    pulse = (f"; the device's pulse ({kept.scheme['pulse']}) is not applied: symbols at one "
             f"sample per symbol" if shaped else "")
    source = (f"counterexamples kept for device {kept.device!r}: the inputs its last run "
              f"failed on, with the {conv.name} {mod} reference's samples for them{pulse}; "
              f"written by `modemverify vectors export --from-report` (modemverify "
              f"{__version__})")
    return VectorSet(name=f"{_slug(kept.device)}-counterexamples", modulation=mod,
                     convention=conv.name, samples_per_symbol=sps, segments=segments,
                     calls=("modulate", "demodulate"), source=source)


def export_kept(report: str | Path, out: str | Path) -> tuple[list[Path], list[str]]:
    """Write the failing inputs kept in a report folder as vector sets in ``out``; return the
    headers written and a line for each device with nothing failing."""
    report = Path(report)
    folder = report / KEPT_FOLDER
    if not report.is_dir():
        raise ConfigError(f"--from-report {report}: no such folder; expected the --report "
                          f"folder of a modemverify check run")
    if not folder.is_dir():
        raise ConfigError(f"--from-report {report}: has no {KEPT_FOLDER}/ folder; expected "
                          f"the --report folder of a modemverify check run that kept "
                          f"counterexamples")
    files = sorted(folder.glob("*.json"))
    if not files:
        raise ConfigError(f"--from-report {report}: {folder} holds no .json file of kept "
                          f"counterexamples")
    written, notes = [], []
    for path in files:
        kept = read_kept(path)
        vs = kept_vector_set(kept)
        if vs is None:
            notes.append(f"{path}: no failing counterexample ({len(kept.entries)} kept, all "
                         f"passing now): nothing written")
            continue
        written.append(write_vector_set(vs, out))
    return written, notes
