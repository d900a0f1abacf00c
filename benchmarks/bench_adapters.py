"""Overhead of the out-of-process adapters against calling the same code in process.

Runs one modulate + demodulate pair per block, through the harness's GuardedDevice, for:

- C QPSK (examples/process-device-c/qpsk_device.c): built as a shared library and called in
  process (``sharedlib``, ``isolate: false``: the baseline), in a worker (``sharedlib``, the
  default ``isolate: true``), and built as a device process (``process``);
- Python QPSK (one class): in process (``python``: the baseline), in a worker (``python`` with
  ``isolate: true``), and as a device process through ``_wire.serve`` (``process``).

Prints, per block size, the median time of a pair, the overhead per pair against the baseline
of the same code, the throughput, and the projected wall time of 10**7 bits (the number of
blocks times the pair time; a BER check adds its channel and counting on top, which are the
same for every adapter).

Usage: python benchmarks/bench_adapters.py [--sizes 1e3,1e4,1e5,1e6] [--repeat 7]
Needs a C compiler (cc) for the C rows.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np
import yaml

from modemverify.adapters.base import GuardedDevice
from modemverify.adapters.isolated import open_adapter
from modemverify.config import load_device

ROOT = Path(__file__).resolve().parents[1]
C_SOURCE = ROOT / "examples" / "process-device-c" / "qpsk_device.c"

PY_DEVICE = '''
import sys
import numpy as np

A = 1 / np.sqrt(2)


class Qpsk:
    """TS 38.211 5.1.3 QPSK."""

    def modulate(self, bits):
        b = bits.reshape(-1, 2)
        return A * ((1 - 2.0 * b[:, 0]) + 1j * (1 - 2.0 * b[:, 1]))

    def demodulate(self, samples):
        out = np.empty((samples.size, 2), np.uint8)
        out[:, 0] = samples.real < 0
        out[:, 1] = samples.imag < 0
        return out.reshape(-1)


if __name__ == "__main__":
    from modemverify.adapters._wire import serve
    sys.exit(serve(Qpsk))
'''


def write(folder: Path, name: str, body: dict) -> Path:
    path = folder / f"{name}.yaml"
    path.write_text(yaml.safe_dump({"name": name, **body, "scheme": {
        "modulation": "qpsk", "convention": "3gpp"}}))
    return path


def build(folder: Path) -> dict[str, tuple[str, Path]]:
    """Device files: label -> (baseline label, path)."""
    (folder / "pydev.py").write_text(textwrap.dedent(PY_DEVICE))
    rows = {
        "python (in process)": ("python (in process)",
                                write(folder, "py", {"adapter": "python",
                                                     "target": "pydev.py:Qpsk"})),
        "python, isolate: true": ("python (in process)",
                                  write(folder, "pyiso", {"adapter": "python",
                                                          "target": "pydev.py:Qpsk",
                                                          "isolate": True})),
        "python, process": ("python (in process)",
                            write(folder, "pyproc", {"adapter": "process",
                                                     "command": ["{python}", "pydev.py"]})),
    }
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:
        print("no C compiler: C rows skipped", file=sys.stderr)
        return rows
    subprocess.run([cc, "-O2", "-shared", "-fPIC", "-DQPSK_LIBRARY_ONLY", "-o",
                    str(folder / "libqpsk.so"), str(C_SOURCE), "-lm"], check=True)
    subprocess.run([cc, "-O2", "-o", str(folder / "qpsk-device"), str(C_SOURCE), "-lm"],
                   check=True)
    lib = {"adapter": "sharedlib", "library": "libqpsk.so",
           "symbols": {"modulate": "qpsk_modulate", "demodulate": "qpsk_demodulate"}}
    rows.update({
        "C sharedlib, isolate: false": ("C sharedlib, isolate: false",
                                        write(folder, "lib", {**lib, "isolate": False})),
        "C sharedlib (isolated)": ("C sharedlib, isolate: false", write(folder, "libiso", lib)),
        "C process": ("C sharedlib, isolate: false",
                      write(folder, "cproc", {"adapter": "process",
                                              "command": ["./qpsk-device"]})),
    })
    return rows


def time_pair(device: GuardedDevice, bits: np.ndarray, repeat: int) -> float:
    device.demodulate(device.modulate(bits))  # warm up (buffers, caches)
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = device.demodulate(device.modulate(bits))
        times.append(time.perf_counter() - t0)
    assert np.array_equal(out, bits)
    return statistics.median(times)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--sizes", default="1e3,1e4,1e5,1e6", help="block sizes in bits")
    p.add_argument("--repeat", type=int, default=7)
    args = p.parse_args(argv)
    sizes = [int(float(s)) // 2 * 2 for s in args.sizes.split(",")]
    rng = np.random.default_rng(1)
    with tempfile.TemporaryDirectory(prefix="mv-bench-") as tmp:
        rows = build(Path(tmp))
        results: dict[str, dict[int, float]] = {}
        for label, (_, path) in rows.items():
            spec = load_device(path)
            t0 = time.perf_counter()
            adapter = open_adapter(spec)
            opened = time.perf_counter() - t0
            device = GuardedDevice(adapter, 2, name=label)
            try:
                results[label] = {n: time_pair(device, rng.integers(0, 2, n, dtype=np.uint8),
                                               args.repeat) for n in sizes}
            finally:
                device.close()
            print(f"opened {label} in {opened:.3f} s", file=sys.stderr)
    head = (f"{'adapter':<28} {'bits/block':>10} {'pair ms':>9} {'overhead us':>12} "
            f"{'Mbit/s':>8} {'1e7 bits s':>11}")
    print(head)
    print("-" * len(head))
    for label, (base, _) in rows.items():
        for n in sizes:
            t = results[label][n]
            over = (t - results[base][n]) * 1e6
            print(f"{label:<28} {n:>10.0e} {t * 1e3:>9.3f} "
                  f"{'-' if base == label else f'{over:.0f}':>12} {n / t / 1e6:>8.1f} "
                  f"{1e7 / n * t:>11.2f}")
        print()
    return 0


if __name__ == "__main__":
    sys.exit(main())
