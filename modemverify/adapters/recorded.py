"""``adapter: recorded``: a device that is a recording: bits and the samples a device produced.

The recording is our vector-set format (a YAML header with ``.npy`` or raw payload, see
:mod:`modemverify.vectors.recording`) or a SigMF recording (``.sigmf-meta``, ``.sigmf-data`` or a
``.sigmf`` archive; ``cf32_le`` or ``ci16_le``; read with the ``sigmf`` package).

Replay is strict: ``modulate(bits)`` returns the recorded samples when ``bits`` is one of the
recorded sequences or a contiguous, symbol-aligned part of one (so any prefix of a recorded PRBS
run works), and raises :class:`~modemverify.errors.AdapterError` "no recording for these bits"
otherwise. ``demodulate(samples)`` replays the same way when the recording says it answers
demodulate calls (``calls: [modulate, demodulate]``), matching the samples after conversion to
float32 (for an int16 recording: to int16 codes at full scale 1). Nothing is synthesised from a recording, so a recorded
device supports only checks whose vectors are in it: ``finite`` needs every label once
(ascending), ``mapping``, ``gray`` and ``energy`` the order-2 de Bruijn probe, ``length`` the
PRBS15 prefixes it asks for; checks that draw fresh random vectors (``roundtrip``'s generated
sequences, ``ber``, ``llr``) get an error verdict saying there is no recording for their bits.
Turn those off in the device file (``checks: {roundtrip: false, ber: false}``).

SigMF: the bits of each annotation come from its ``modemverify:bits`` field (a string of 0 and
1, the bits sent for the annotated samples; declare the ``modemverify`` extension in
``core:extensions``); or the device file gives ``bits: FILE`` (``.npy`` or one byte per bit),
the bits of the whole recording from its first sample. ``full_scale`` (device file) scales
``ci16_le``: value = integer * full_scale / 32768.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..dsp.formats import encode_samples, full_scale_opt
from ..errors import AdapterError, ConfigError
from ..options import Opt
from ..schemes.conventions import MODULATIONS
from ..schemes.labels import bits_to_labels
from ..vectors.recording import load_npy, read_vector_set
from .base import ModemAdapter, summarise_bits, summarise_samples

__all__ = ["ADAPTER", "SIGMF_SUFFIXES", "SIGMF_BITS_KEY", "SIGMF_DATATYPES", "RecordedAdapter"]

SIGMF_SUFFIXES = (".sigmf-meta", ".sigmf-data", ".sigmf")
SIGMF_BITS_KEY = "modemverify:bits"
SIGMF_DATATYPES = ("cf32_le", "ci16_le")


def _segments_from_sigmf(path: Path, spec, bits_file: Path | None, full_scale: float):
    """[(name, bits, samples)] of a SigMF recording; ``full_scale`` scales ``ci16_le``."""
    file = spec.file
    try:
        import sigmf
        from sigmf import sigmffile
    except ImportError:
        raise ConfigError(f"recording={spec.extra['recording']!r}: reading SigMF needs the "
                          f"sigmf package (pip install 'modemverify[sigmf]')", file=file,
                          key="recording") from None
    try:
        rec = sigmffile.fromfile(str(path))
    except Exception as exc:  # sigmf raises its own error types and JSON errors
        raise ConfigError(f"recording={spec.extra['recording']!r}: not a readable SigMF "
                          f"recording ({type(exc).__name__}: {exc})", file=file,
                          key="recording") from None
    if not isinstance(rec, sigmf.SigMFFile):
        raise ConfigError(f"recording={spec.extra['recording']!r}: a SigMF collection; name "
                          f"one recording", file=file, key="recording")
    if path.suffix == ".sigmf-meta" and not path.with_suffix(".sigmf-data").is_file():
        raise ConfigError(f"recording={spec.extra['recording']!r}: its data file "
                          f"{path.with_suffix('.sigmf-data').name} is missing (a .sigmf-meta "
                          f"needs the .sigmf-data beside it)", file=file, key="recording")
    dtype = rec.get_global_field("core:datatype")
    if dtype not in SIGMF_DATATYPES:
        raise ConfigError(f"recording={spec.extra['recording']!r}: core:datatype={dtype!r}; "
                          f"expected {' or '.join(SIGMF_DATATYPES)}", file=file,
                          key="recording")
    channels = getattr(rec, "num_channels", None) or rec.get_global_field("core:num_channels", 1)
    if channels != 1:
        raise ConfigError(f"recording={spec.extra['recording']!r}: {channels} channels; "
                          f"expected 1", file=file, key="recording")
    try:
        data = np.asarray(rec.read_samples(), dtype=np.complex128).reshape(-1)
    except Exception as exc:  # sigmf's own errors, a truncated or missing data file
        raise ConfigError(f"recording={spec.extra['recording']!r}: the samples cannot be read "
                          f"({type(exc).__name__}: {exc})", file=file, key="recording") from None
    if dtype == "ci16_le":  # sigmf scales integers to [-1, 1): apply the device's full scale
        data = data * full_scale
    k = spec.scheme.bits_per_symbol
    sps = spec.scheme.samples_per_symbol
    if bits_file is not None:
        bits = _read_bits(bits_file, spec)
        n = bits.size // k * sps
        if bits.size % k or n > data.size:
            raise ConfigError(f"bits={spec.extra['bits']!r}: {bits.size} bits need "
                              f"{bits.size / k * sps:g} samples; the recording has {data.size}",
                              file=file, key="bits")
        return [("recording", bits, data[:n])]
    out = []
    for i, ann in enumerate(rec.get_annotations()):
        text = ann.get(SIGMF_BITS_KEY)
        if text is None:
            continue
        key = f"annotations[{i}].{SIGMF_BITS_KEY}"
        if not isinstance(text, str) or set(text) - {"0", "1"}:
            raise ConfigError(f"recording={spec.extra['recording']!r}: {key} must be a string "
                              f"of 0 and 1", file=file, key="recording")
        bits = np.frombuffer(text.encode("ascii"), dtype=np.uint8) - ord("0")
        start = ann.get("core:sample_start", 0)
        count = ann.get("core:sample_count", bits.size // k * sps)
        for field, value in (("core:sample_start", start), ("core:sample_count", count)):
            if not isinstance(value, int) or isinstance(value, bool) or value < 0:
                raise ConfigError(f"recording={spec.extra['recording']!r}: annotations[{i}]."
                                  f"{field}={value!r}: expected a whole number >= 0",
                                  file=file, key="recording")
        if bits.size % k or count != bits.size // k * sps or start + count > data.size:
            raise ConfigError(f"recording={spec.extra['recording']!r}: {key} holds {bits.size} "
                              f"bits for {count} samples from sample {start}; {k} bits per "
                              f"symbol and {sps} samples per symbol need "
                              f"{bits.size / k * sps:g}", file=file, key="recording")
        out.append((str(ann.get("core:label", f"annotation{i}")), bits.astype(np.uint8),
                    data[start:start + count]))
    if not out:
        raise ConfigError(f"recording={spec.extra['recording']!r}: no bits for the samples: add "
                          f"annotations with {SIGMF_BITS_KEY!r}, or set bits: FILE in the device "
                          f"file", file=file, key="recording")
    return out


def _read_bits(path: Path, spec) -> np.ndarray:
    if path.suffix == ".npy":
        try:
            bits = load_npy(path, spec.file, "bits")
        except ConfigError as exc:
            raise ConfigError(f"bits={spec.extra['bits']!r}: {exc.raw_message}",
                              file=spec.file, key="bits") from None
    else:
        bits = np.fromfile(path, dtype=np.uint8)
    bits = np.asarray(bits).reshape(-1)
    if bits.dtype.kind not in "biu" or not np.all((bits == 0) | (bits == 1)):
        raise ConfigError(f"bits={spec.extra['bits']!r}: expected 0/1 values, one per byte",
                          file=spec.file, key="bits")
    return bits.astype(np.uint8)


def _load(spec):
    """(segments as [(name, bits, samples)], calls, sample_format) of a spec.

    ``sample_format`` is the vector set's (``float32`` or ``int16``), or ``"sigmf"``.
    """
    file = spec.file
    x = spec.extra
    rec = x.get("recording")
    if not isinstance(rec, str) or not rec:
        raise ConfigError(f"recording={rec!r}: expected the path of a vector-set header (.yaml) "
                          f"or a SigMF recording", file=file, key="recording")
    path = spec.resolve(rec)
    if not path.exists() and path.suffix not in SIGMF_SUFFIXES:
        raise ConfigError(f"recording={rec!r}: no such file {path}", file=file, key="recording")
    bits_file = None
    if "bits" in x:
        if not isinstance(x["bits"], str):
            raise ConfigError(f"bits={x['bits']!r}: expected a file name", file=file, key="bits")
        bits_file = spec.resolve(x["bits"])
        if not bits_file.is_file():
            raise ConfigError(f"bits={x['bits']!r}: no such file {bits_file}", file=file,
                              key="bits")
    full_scale = x.get("full_scale", 1.0)  # checked when the file loaded
    if path.suffix in SIGMF_SUFFIXES:
        return _segments_from_sigmf(path, spec, bits_file, full_scale), ("modulate",), "sigmf"
    if path.suffix not in (".yaml", ".yml"):
        raise ConfigError(f"recording={rec!r}: expected a vector-set header (.yaml) or a SigMF "
                          f"file ({', '.join(SIGMF_SUFFIXES)})", file=file, key="recording")
    for key in ("bits", "full_scale"):
        if key in x:
            raise ConfigError(f"{key} applies to SigMF recordings; a vector set's header "
                              f"gives it", file=file, key=key)
    vs = read_vector_set(path)
    scheme = spec.scheme
    if vs.modulation != scheme.modulation or vs.samples_per_symbol != scheme.samples_per_symbol:
        raise ConfigError(f"recording={rec!r} holds {vs.modulation} at {vs.samples_per_symbol} "
                          f"samples per symbol; the device file claims {scheme.modulation} at "
                          f"{scheme.samples_per_symbol}", file=file, key="recording")
    segs = [(s.name, s.bits, s.samples) for s in vs.segments]
    return segs, vs.calls, vs.sample_format


class RecordedAdapter(ModemAdapter):
    """Replays a recording (see the module docstring)."""

    adapter_id = "recorded"
    replays_only = True
    config_keys = {
        "recording": Opt("str", None, "vector-set header (.yaml) or SigMF recording, relative "
                         "to the device file", required=True, expected="a path"),
        "bits": Opt("str", None, "SigMF only: file of the bits sent (.npy, or one byte per "
                    "bit), from sample 0", expected="a path"),
        "full_scale": full_scale_opt("SigMF ci16_le only: the value of the integer 32768 "
                                     "(default 1.0)"),
    }

    def __init__(self, segments, calls, bits_per_symbol: int, samples_per_symbol: int,
                 sample_format: str = "float32", name: str = ""):
        if bits_per_symbol > 8:  # labels are matched as bytes
            raise ConfigError(f"recordings of {bits_per_symbol} bits per symbol are not "
                              f"supported (at most 8)", key="recording")
        self.k = int(bits_per_symbol)
        self.sps = int(samples_per_symbol)
        self.name = name
        self.capabilities = frozenset(calls)
        self.segments = []
        for seg_name, bits, samples in segments:
            labels = bits_to_labels(bits, self.k).astype(np.uint8)
            self.segments.append((seg_name, labels.tobytes(), bits, samples,
                                  self._key(samples, sample_format)))
        self.sample_format = sample_format

    @staticmethod
    def _key(samples: np.ndarray, sample_format: str) -> bytes:
        """Bytes the demodulate replay matches on: float32, or int16 codes at full scale 1."""
        fmt = "int16" if sample_format == "int16" else "float32"
        return encode_samples(samples, fmt).tobytes()

    @classmethod
    def validate_spec(cls, spec) -> None:
        segments, calls, _ = _load(spec)
        if spec.scheme.bits_per_symbol > 8:
            raise ConfigError(f"recordings of {spec.scheme.modulation} are not supported (at "
                              f"most 8 bits per symbol)", file=spec.file, key="recording")
        k = MODULATIONS[spec.scheme.modulation]
        for name, bits, samples in segments:
            if bits.size % k:
                raise ConfigError(f"segment {name!r}: {bits.size} bits is not a whole number of "
                                  f"{k}-bit labels", file=spec.file, key="recording")

    @classmethod
    def from_spec(cls, spec) -> "RecordedAdapter":
        segments, calls, fmt = _load(spec)
        return cls(segments, calls, spec.scheme.bits_per_symbol,
                   spec.scheme.samples_per_symbol, "int16" if fmt == "int16" else "float32",
                   name=spec.extra["recording"])

    def _describe(self) -> str:
        parts = [f"{name} ({len(labels)} symbols)" for name, labels, *_ in self.segments[:6]]
        more = len(self.segments) - 6
        return ", ".join(parts) + (f" and {more} more" if more > 0 else "")

    def modulate(self, bits):
        bits = np.asarray(bits, dtype=np.uint8)
        summary = summarise_bits(bits)
        if bits.size % self.k:
            raise AdapterError(f"{bits.size} bits is not a whole number of {self.k}-bit labels",
                               call="modulate", input_summary=summary)
        query = bits_to_labels(bits, self.k).astype(np.uint8).tobytes()
        for _, labels, _, samples, _ in self.segments:
            at = labels.find(query)  # one byte per label: every match is symbol-aligned
            if at >= 0:
                return samples[at * self.sps:(at + len(query)) * self.sps].copy()
        raise AdapterError(f"no recording for these bits: a recorded device answers only bit "
                           f"sequences in its recording ({self._describe()}) or a contiguous "
                           f"part of one", call="modulate", input_summary=summary)

    def demodulate(self, samples):
        samples = np.asarray(samples, dtype=np.complex128)
        summary = summarise_samples(samples)
        if samples.size % self.sps:
            raise AdapterError(f"{samples.size} samples is not a whole number of symbols of "
                               f"{self.sps} samples", call="demodulate", input_summary=summary)
        query = self._key(samples, self.sample_format)
        step = len(query) // max(samples.size, 1) * self.sps if samples.size else 1
        for _, _, bits, rec_samples, key in self.segments:
            at = key.find(query)
            while at >= 0 and at % step:  # a match must start on a symbol
                at = key.find(query, at + 1)
            if at >= 0:
                first = at // step
                return bits[first * self.k:(first + samples.size // self.sps) * self.k].copy()
        raise AdapterError(f"no recording for these samples: a recorded device answers only "
                           f"sample sequences in its recording ({self._describe()}) or a "
                           f"contiguous part of one", call="demodulate", input_summary=summary)


#: the adapter this module adds (found by adapters.registry)
ADAPTER = RecordedAdapter
