"""Vector sets on disk: bits and the samples a modem produces for them, in our own format.

A vector set is a YAML header beside its payload files. The header says what the data is and
where it came from; the payload is in ``.npy`` files, raw little-endian binary files, or both
(the same data; ``.npy`` is read when present)::

    format: modemverify-vectors
    version: 1
    name: qpsk-3gpp
    scheme: {modulation: qpsk, convention: 3gpp, samples_per_symbol: 1}
    calls: [modulate, demodulate]   # the device calls the data answers (default [modulate])
    source: ...                     # free text: which device, instrument, firmware build, table
    bits:                           # one bit per byte, 0 or 1, in the order they are fed
      count: 1030
      npy: qpsk-3gpp.bits.npy       # uint8, shape (count,)
      raw: qpsk-3gpp.bits.u8        # the same bytes, no header
    samples:
      count: 515
      npy: qpsk-3gpp.iq.npy         # complex128 or complex64, shape (count,)
      raw: qpsk-3gpp.iq.cf32        # interleaved I, Q; see sample_format
      sample_format: float32        # of the raw file: float32, or int16 (Q15 with full_scale)
      full_scale: 1.0               # int16 only: the value of the integer 32768
    segments:                       # consecutive, independent sequences (one modulate call each)
      - {name: labels, symbols: 4, description: every label once, ascending}
      - ...
    sha256: {qpsk-3gpp.bits.npy: ..., ...}   # optional; checked when present

Segment ``i`` holds ``symbols * bits_per_symbol`` bits and ``symbols * samples_per_symbol``
samples, taken in order from the payload. Paths are relative to the header and stay inside its
folder (an absolute path, or one that climbs out with ``..``, is refused). ``.npy`` files are
read with ``allow_pickle=False``, after their header is checked against the file's size (a
header claiming more elements than the file holds is refused before anything is allocated);
the header as plain YAML data (:mod:`modemverify.datafile`).

:func:`golden_vector_set` builds the golden sets that ``modemverify vectors export`` writes: the
bits and the expected points of a published convention (3GPP TS 38.211 5.1, IEEE 802.11 OFDM
tables) from modemverify's convention tables, which the project's tests check against those
documents.
"""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import yaml

from .._version import __version__
from ..datafile import read_yaml
from ..dsp.formats import (
    SAMPLE_FORMATS,
    WIRE_FORMATS,
    check_format,
    check_full_scale,
    encode_samples,
    from_format,
)
from ..errors import ConfigError
from ..schemes.conventions import MODULATIONS, get_convention
from ..schemes.labels import labels_to_bits
from ..schemes.reference import ReferenceModem
from .coverage import de_bruijn_labels, exhaustive_labels
from .prbs import prbs

__all__ = [
    "FORMAT", "VERSION", "CALLS", "GOLDEN_SEGMENTS", "SHIPPED_SETS", "Segment", "VectorSet",
    "default_segments", "golden_vector_set", "write_vector_set", "export_golden",
    "read_vector_set", "load_npy",
]

FORMAT = "modemverify-vectors"
VERSION = 1
CALLS = ("modulate", "demodulate")
_RAW_SUFFIX = {"float32": "cf32", "int16": "ci16"}

#: golden segment name -> what it holds (see :func:`golden_vector_set`)
GOLDEN_SEGMENTS = {
    "labels": "every label once, in ascending label order (the finite check's vector)",
    "de-bruijn": "every ordered pair of labels (order-2 de Bruijn sequence over the labels, "
                 "read linearly): the probe of the mapping, gray and energy checks",
    "prbs9": "ITU-T O.150 PRBS9 from the all-ones state, one period and on to a whole symbol",
}

#: the sets shipped in the repository's vectors/ folder: (convention, modulation)
SHIPPED_SETS = tuple([("3gpp", m) for m in ("bpsk", "qpsk", "16qam", "64qam", "256qam")]
                     + [("ieee802.11", m) for m in ("bpsk", "qpsk", "16qam", "64qam")])

_SOURCES = {
    "3gpp": "3GPP TS 38.211 clause 5.1 (the same tables as TS 36.211 7.1)",
    "ieee802.11": "IEEE Std 802.11-2007 17.3.5.7, Tables 17-6 to 17-10 (802.11a-1999 "
                  "Tables 81-85)",
}


@dataclass
class Segment:
    """One independent sequence: the bits, and the samples produced for them."""

    name: str
    bits: np.ndarray
    samples: np.ndarray
    description: str = ""


@dataclass
class VectorSet:
    """A vector set in memory (see the module docstring for the file format)."""

    name: str
    modulation: str
    convention: str
    samples_per_symbol: int
    segments: list[Segment]
    calls: tuple[str, ...] = ("modulate",)
    source: str = ""
    sample_format: str = "float32"
    full_scale: float = 1.0
    path: Path | None = field(default=None, compare=False)

    @property
    def bits_per_symbol(self) -> int:
        return MODULATIONS[self.modulation]

    @property
    def bits(self) -> np.ndarray:
        return np.concatenate([s.bits for s in self.segments]) if self.segments else \
            np.zeros(0, np.uint8)

    @property
    def samples(self) -> np.ndarray:
        return np.concatenate([s.samples for s in self.segments]) if self.segments else \
            np.zeros(0, np.complex128)


# -- golden sets -----------------------------------------------------------------------------

def default_segments(modulation: str) -> tuple[str, ...]:
    """labels and prbs9 always; the de Bruijn probe while it stays small (up to 16 labels)."""
    k = MODULATIONS[modulation]
    return ("labels", "de-bruijn", "prbs9") if k <= 4 else ("labels", "prbs9")


def golden_vector_set(modulation: str, convention: str, *, samples_per_symbol: int = 1,
                      segments: tuple[str, ...] | None = None,
                      sample_format: str = "float32", full_scale: float = 1.0) -> VectorSet:
    """Golden vectors: bits and the points a device following ``convention`` must produce.

    Parameters
    ----------
    modulation, convention : str
        E.g. ``"16qam"``, ``"3gpp"``.
    samples_per_symbol : int
        Above 1, each point is held for that many samples, scaled by
        ``1 / sqrt(samples_per_symbol)`` (the unit-energy rectangular pulse modemverify assumes
        when no pulse is declared).
    segments : tuple of str, optional
        Names from :data:`GOLDEN_SEGMENTS`; default :func:`default_segments`.
    sample_format, full_scale
        Of the raw sample file written by :func:`write_vector_set`.

    Examples
    --------
    >>> vs = golden_vector_set("qpsk", "3gpp", segments=("labels",))
    >>> vs.segments[0].bits.tolist()
    [0, 0, 0, 1, 1, 0, 1, 1]
    >>> [complex(round(z.real, 4), round(z.imag, 4)) for z in vs.segments[0].samples]
    [(0.7071+0.7071j), (0.7071-0.7071j), (-0.7071+0.7071j), (-0.7071-0.7071j)]
    """
    conv = get_convention(convention, modulation)
    k = conv.bits_per_symbol
    ref = ReferenceModem(conv, samples_per_symbol)
    names = tuple(segments) if segments is not None else default_segments(modulation)
    out = []
    for name in names:
        if name == "labels":
            bits = labels_to_bits(exhaustive_labels(k), k)
        elif name == "de-bruijn":
            bits = labels_to_bits(de_bruijn_labels(k, order=2), k)
        elif name == "prbs9":
            n_sym = -(-511 // k)
            bits = prbs("prbs9", n_sym * k)
        else:
            raise ConfigError(f"segment={name!r}: expected one of {', '.join(GOLDEN_SEGMENTS)}",
                              key="segments")
        out.append(Segment(name, bits.astype(np.uint8), ref.modulate(bits),
                           GOLDEN_SEGMENTS[name]))
    source = (f"golden vectors: the {conv.name} {modulation} table of "
              f"{_SOURCES.get(conv.name, conv.source)}, as modemverify's convention tables "
              f"give it; written by `modemverify vectors export` (modemverify {__version__})")
    return VectorSet(name=f"{modulation}-{conv.name}", modulation=modulation,
                     convention=conv.name, samples_per_symbol=samples_per_symbol,
                     segments=out, calls=("modulate", "demodulate"), source=source,
                     sample_format=sample_format, full_scale=full_scale)


# -- writing ---------------------------------------------------------------------------------

def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def write_vector_set(vs: VectorSet, folder: str | Path, *, npy: bool = True,
                     raw: bool = True) -> Path:
    """Write ``vs`` as ``folder/NAME.yaml`` and its payload files; return the header's path."""
    if not (npy or raw):
        raise ConfigError("write at least one of the .npy and the raw payloads", key="format")
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    bits = np.ascontiguousarray(vs.bits, dtype=np.uint8)
    samples = np.ascontiguousarray(vs.samples, dtype=np.complex128)
    bits_entry: dict = {"count": int(bits.size)}
    samples_entry: dict = {"count": int(samples.size)}
    files = []
    if npy:
        np.save(folder / f"{vs.name}.bits.npy", bits, allow_pickle=False)
        np.save(folder / f"{vs.name}.iq.npy", samples, allow_pickle=False)
        bits_entry["npy"] = f"{vs.name}.bits.npy"
        samples_entry["npy"] = f"{vs.name}.iq.npy"
        files += [bits_entry["npy"], samples_entry["npy"]]
    if raw:
        raw_bits = f"{vs.name}.bits.u8"
        raw_iq = f"{vs.name}.iq.{_RAW_SUFFIX[vs.sample_format]}"
        (folder / raw_bits).write_bytes(bits.tobytes())
        (folder / raw_iq).write_bytes(
            encode_samples(samples, vs.sample_format, vs.full_scale).tobytes())  # little-endian
        bits_entry["raw"] = raw_bits
        samples_entry["raw"] = raw_iq
        files += [raw_bits, raw_iq]
    samples_entry["sample_format"] = vs.sample_format
    if vs.sample_format == "int16":
        samples_entry["full_scale"] = float(vs.full_scale)
    header = {
        "format": FORMAT, "version": VERSION, "name": vs.name,
        "scheme": {"modulation": vs.modulation, "convention": vs.convention,
                   "samples_per_symbol": int(vs.samples_per_symbol)},
        "calls": list(vs.calls), "source": vs.source,
        "bits": bits_entry, "samples": samples_entry,
        "segments": [{"name": s.name, "symbols": int(s.bits.size // vs.bits_per_symbol),
                      **({"description": s.description} if s.description else {})}
                     for s in vs.segments],
        "sha256": {f: _sha256(folder / f) for f in files},
    }
    path = folder / f"{vs.name}.yaml"
    text = ("# modemverify vector set: bits and the samples for them (format: see the project's "
            "README, \"Recorded vectors\")\n" + yaml.safe_dump(header, sort_keys=False, width=96))
    path.write_text(text, encoding="utf-8")
    return path


def export_golden(folder: str | Path, sets=SHIPPED_SETS, **options) -> list[Path]:
    """Write golden vector sets for ``(convention, modulation)`` pairs; return header paths."""
    return [write_vector_set(golden_vector_set(mod, conv, **options), folder)
            for conv, mod in sets]


# -- reading ---------------------------------------------------------------------------------

def _need(cond: bool, message: str, file: str, key: str) -> None:
    if not cond:
        raise ConfigError(message, file=file, key=key)


def _payload_path(folder: Path, name, file: str, key: str) -> Path:
    short = key.rsplit('.', 1)[-1]
    _need(isinstance(name, str) and bool(name) and "\0" not in name, f"{short}={name!r}: "
          f"expected a file name relative to the header", file, key)
    inside = os.path.normpath(name)
    _need(not os.path.isabs(name) and inside != ".." and
          not inside.startswith(".." + os.sep) and not (os.altsep and inside.startswith(
              ".." + os.altsep)),
          f"{short}={name!r}: payload files must be in the header's folder or below it (no "
          f"absolute path, no '..' out of it)", file, key)
    path = folder / name
    _need(path.is_file(), f"{short}={name!r}: no such file {path}", file, key)
    return path


def load_npy(path: Path, file: str | None, key: str) -> np.ndarray:
    """A ``.npy`` file's array (``allow_pickle=False``); raises ConfigError naming ``file``
    and ``key`` for a file that is not one, or whose header claims more data than it holds
    (checked before anything is allocated)."""
    try:
        with open(path, "rb") as f:
            version = np.lib.format.read_magic(f)
            read_header = (np.lib.format.read_array_header_1_0 if version == (1, 0) else
                           np.lib.format.read_array_header_2_0)
            shape, _, dtype = read_header(f)
            data_bytes = os.fstat(f.fileno()).st_size - f.tell()
    except (ValueError, OSError, EOFError) as exc:
        raise ConfigError(f"{path.name}: not a readable .npy file ({exc})", file=file,
                          key=key) from None
    count = 1
    for n in shape:
        count *= int(n)
    _need(count * dtype.itemsize <= data_bytes,
          f"{path.name}: its header claims an array of shape {shape} ({count} elements of "
          f"{dtype}, {count * dtype.itemsize} bytes); the file holds {data_bytes} bytes of data",
          file, key)
    try:
        return np.load(path, allow_pickle=False)
    except (ValueError, OSError, MemoryError) as exc:
        raise ConfigError(f"{path.name}: not a readable .npy file ({exc})", file=file,
                          key=key) from None


def _load_npy(path: Path, file: str, key: str, kinds: str) -> np.ndarray:
    arr = load_npy(path, file, key)
    _need(arr.ndim == 1 and arr.dtype.kind in kinds,
          f"{path.name}: an array of shape {arr.shape} and dtype {arr.dtype}; expected 1-D "
          f"{'uint8 bits' if kinds == 'ui' else 'complex samples'}", file, key)
    return arr


def read_vector_set(path: str | Path, *, verify: bool = True) -> VectorSet:
    """Read a vector-set header and its payload; raises ConfigError naming file and key."""
    path = Path(path)
    file = str(path)
    head = read_yaml(path, what="vector-set header")  # plain data: see modemverify.datafile
    _need(isinstance(head, dict), "expected a mapping of keys", file, "format")
    _need(head.get("format") == FORMAT, f"format={head.get('format')!r}: expected {FORMAT!r}",
          file, "format")
    _need(head.get("version") == VERSION, f"version={head.get('version')!r}: this modemverify "
          f"reads version {VERSION}", file, "version")
    scheme = head.get("scheme")
    _need(isinstance(scheme, dict), f"scheme={scheme!r}: expected a mapping with modulation, "
          f"convention and samples_per_symbol", file, "scheme")
    modulation = scheme.get("modulation")
    _need(modulation in MODULATIONS, f"modulation={modulation!r}: expected one of "
          f"{', '.join(MODULATIONS)}", file, "scheme.modulation")
    convention = scheme.get("convention", "")
    _need(isinstance(convention, str), f"convention={convention!r}: expected text", file,
          "scheme.convention")
    sps = scheme.get("samples_per_symbol", 1)
    _need(isinstance(sps, int) and not isinstance(sps, bool) and sps >= 1,
          f"samples_per_symbol={sps!r}: expected a whole number >= 1", file,
          "scheme.samples_per_symbol")
    calls = head.get("calls", ["modulate"])
    _need(isinstance(calls, list) and calls and all(c in CALLS for c in calls),
          f"calls={calls!r}: expected a non-empty list drawn from {', '.join(CALLS)}", file,
          "calls")
    k = MODULATIONS[modulation]
    folder = path.parent
    checksums = head.get("sha256") or {}
    _need(isinstance(checksums, dict), f"sha256={checksums!r}: expected a mapping of file "
          f"names to hex digests", file, "sha256")

    def checked(p: Path, key: str) -> Path:
        want = checksums.get(p.name)
        if verify and want is not None and _sha256(p) != want:
            raise ConfigError(f"{p.name}: its SHA-256 does not match the header (the file "
                              f"changed after the header was written)", file=file, key=key)
        return p

    bits_e = head.get("bits")
    _need(isinstance(bits_e, dict) and ("npy" in bits_e or "raw" in bits_e),
          f"bits={bits_e!r}: expected a mapping with npy and/or raw file names", file, "bits")
    if "npy" in bits_e:
        bits = _load_npy(checked(_payload_path(folder, bits_e["npy"], file, "bits.npy"),
                                 "bits.npy"), file, "bits.npy", "ui")
    else:
        p = checked(_payload_path(folder, bits_e["raw"], file, "bits.raw"), "bits.raw")
        bits = np.fromfile(p, dtype=np.uint8)
    _need(bool(np.all((bits == 0) | (bits == 1))), "bits: values other than 0 and 1", file,
          "bits")
    bits = bits.astype(np.uint8)

    samp_e = head.get("samples")
    _need(isinstance(samp_e, dict) and ("npy" in samp_e or "raw" in samp_e),
          f"samples={samp_e!r}: expected a mapping with npy and/or raw file names", file,
          "samples")
    fmt = check_format(samp_e.get("sample_format", "float32"), WIRE_FORMATS, file=file,
                       key="samples.sample_format")
    full_scale = check_full_scale(samp_e.get("full_scale", 1.0), file=file,
                                  key="samples.full_scale")
    if "npy" in samp_e:
        samples = _load_npy(checked(_payload_path(folder, samp_e["npy"], file, "samples.npy"),
                                    "samples.npy"), file, "samples.npy", "c")
    else:
        p = checked(_payload_path(folder, samp_e["raw"], file, "samples.raw"), "samples.raw")
        raw = p.read_bytes()
        size = SAMPLE_FORMATS[fmt].bytes_per_sample
        _need(len(raw) % size == 0, f"{p.name}: {len(raw)} bytes is not a whole number of "
              f"{fmt} samples ({size} bytes each)", file, "samples.raw")
        samples = from_format(raw, fmt, full_scale)
    for key, arr, entry in (("bits", bits, bits_e), ("samples", samples, samp_e)):
        if "count" in entry:
            _need(entry["count"] == arr.size, f"count={entry['count']!r}, but the file holds "
                  f"{arr.size}", file, f"{key}.count")

    seg_e = head.get("segments")
    if seg_e is None:
        _need(bits.size % k == 0, f"{bits.size} bits is not a whole number of {k}-bit labels",
              file, "bits")
        seg_e = [{"name": "all", "symbols": bits.size // k}]
    _need(isinstance(seg_e, list) and seg_e, f"segments={seg_e!r}: expected a list of "
          f"{{name, symbols}}", file, "segments")
    segments = []
    b0 = s0 = 0
    for i, s in enumerate(seg_e):
        key = f"segments[{i}]"
        _need(isinstance(s, dict) and isinstance(s.get("symbols"), int)
              and not isinstance(s.get("symbols"), bool) and s["symbols"] >= 0,
              f"{s!r}: expected a mapping with name and symbols (a whole number)", file, key)
        n = s["symbols"]
        b1, s1 = b0 + n * k, s0 + n * sps
        _need(b1 <= bits.size and s1 <= samples.size,
              f"symbols={n}: the segments need {b1} bits and {s1} samples so far; the payload "
              f"holds {bits.size} and {samples.size}", file, key)
        segments.append(Segment(str(s.get("name", f"segment{i}")), bits[b0:b1],
                                samples[s0:s1].astype(np.complex128),
                                str(s.get("description", ""))))
        b0, s0 = b1, s1
    _need(b0 == bits.size and s0 == samples.size,
          f"the segments cover {b0} bits and {s0} samples; the payload holds {bits.size} and "
          f"{samples.size}", file, "segments")
    return VectorSet(name=str(head.get("name", path.stem)), modulation=modulation,
                     convention=convention, samples_per_symbol=sps, segments=segments,
                     calls=tuple(calls), source=str(head.get("source", "")),
                     sample_format=fmt, full_scale=full_scale, path=path)
