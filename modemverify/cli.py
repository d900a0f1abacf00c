"""The ``modemverify`` command line.

Exit codes: 0 every verdict passed; 1 a verdict failed or errored (or was inconclusive where the
device file says that gates); 2 bad usage or a bad device file.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import sys

from ._version import __version__
from .config import load_device, parse_device
from .demo import run_demo
from .errors import AdapterError, ConfigError, UnknownNameError
from .execution import INSTALL_HINT, Execution, dask_available
from .identify import identify
from .oracles import ORACLES
from .plan import plan, render_plan
from .report.outputs import OutputLock, check_output_file, check_output_folder
from .runner import DEFAULT_SEED
from .schemes.conventions import CONVENTIONS, MODULATIONS
from .schemes.theory import THEORY_MODULATIONS, ber, detection, ebn0_for_ber, ser
from .selftest import DEFAULT_MODULATIONS, DEFAULT_SEEDS, certify
from .session import (
    EXIT_FAIL,
    EXIT_INTERRUPTED,
    EXIT_OK,
    EXIT_USAGE,
    compare_and_report,
    run_and_report,
)
from .vectors.kept import export_kept
from .vectors.recording import SHIPPED_SETS, export_golden

__all__ = [
    "build_parser", "cmd_plan", "main", "cmd_check", "cmd_theory", "cmd_compare", "cmd_checks",
    "cmd_identify", "cmd_vectors_export", "cmd_demo", "cmd_selftest",
]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse exits 2 on usage errors, as we do
        self.print_usage(sys.stderr)
        self.exit(EXIT_USAGE, f"modemverify: error: {message}\n")


def _seed(text: str) -> int:
    try:
        value = int(text, 0)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--seed={text!r}: expected a whole number") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"--seed={text!r}: expected a number >= 0")
    return value


def _workers(text: str):
    if text == "auto":
        return text
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise argparse.ArgumentTypeError(f"--workers={text!r}: expected a whole number >= 1, "
                                         f"or auto")
    return value


def _seconds(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        value = -1.0
    if not (value > 0 and value < float("inf")):
        raise argparse.ArgumentTypeError(f"--time-budget={text!r}: expected a number of "
                                         f"seconds > 0")
    return value


def _execution_options(parser) -> None:
    parser.add_argument("--workers", type=_workers, metavar="N",
                        help="run the BER check's blocks on N local worker processes, or "
                             "auto for the cores available (the verdicts do not change)")
    parser.add_argument("--cluster", metavar="ADDRESS",
                        help="run the BER check's blocks on a Dask scheduler "
                             "(tcp://host:8786), or local for a LocalCluster of --workers "
                             "processes; needs pip install 'modemverify[cluster]'")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="modemverify", description="Verify a modem implementation against "
                "published conventions and theory.")
    p.add_argument("--version", action="version", version=f"modemverify {__version__}")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)

    c = sub.add_parser("check", help="run every check on one or more device files")
    c.add_argument("devices", nargs="+", metavar="DEVICE.yaml")
    c.add_argument("--junit", metavar="FILE", help="write JUnit XML here")
    c.add_argument("--report", metavar="DIR", help="write the HTML report (index.html) here")
    c.add_argument("--seed", type=_seed, default=DEFAULT_SEED,
                   help=f"seed of every random draw (default {DEFAULT_SEED})")
    c.add_argument("--only", metavar="CHECK", action="append",
                   help="run only this check (repeatable)")
    _execution_options(c)
    c.add_argument("--time-budget", type=_seconds, metavar="SECONDS",
                   help="warn when the BER check will likely take longer than this")
    c.add_argument("--campaign", metavar="FILE",
                   help="keep the BER campaign's state here (default: campaign.json in the "
                        "--report folder)")
    c.add_argument("--resume", action="store_true",
                   help="continue an interrupted BER campaign from its campaign file (the "
                        "same device files, seed and modemverify version)")

    pl = sub.add_parser("plan", help="what the BER check will cost: expected bits and time "
                        "per Eb/N0 point, from a short probe of the device")
    pl.add_argument("devices", nargs="+", metavar="DEVICE.yaml")
    pl.add_argument("--workers", type=_workers, metavar="N",
                    help="plan for N worker processes, or auto for the cores available "
                         "(default: the device file's execution.workers)")

    i = sub.add_parser("identify", help="describe a device's mapping without a claim")
    i.add_argument("device", metavar="DEVICE.yaml")
    i.add_argument("--json", action="store_true", help="print JSON")

    sub.add_parser("checks", help="list every check, its verdicts and its options")

    cp = sub.add_parser("compare", help="judge implementation B against implementation A on "
                        "the same bits")
    cp.add_argument("a", metavar="A.yaml", help="the reference implementation")
    cp.add_argument("b", metavar="B.yaml", help="the implementation judged against A")
    cp.add_argument("--junit", metavar="FILE", help="write JUnit XML here")
    cp.add_argument("--report", metavar="DIR", help="write the HTML report (index.html) here")
    cp.add_argument("--seed", type=_seed, default=DEFAULT_SEED,
                    help=f"seed of every random draw (default {DEFAULT_SEED})")
    cp.add_argument("--evm-limit", type=float, metavar="PERCENT",
                    help="EVM of B against A (default: TS 38.104 Table 6.5.2.2-1 for the "
                         "modulation)")
    cp.add_argument("--sample-error", type=float, metavar="PERCENT",
                    help="largest RMS per-sample error of B against A (default: the EVM limit)")
    cp.add_argument("--spectrum-tolerance", type=float, default=1.0, metavar="DB",
                    help="largest PSD difference in band (default 1 dB)")

    t = sub.add_parser("theory", help="print theory BER/SER over AWGN for a modulation")
    t.add_argument("modulation", help=", ".join(_THEORY))
    t.add_argument("--ebn0", default="0:12:1", metavar="START:STOP:STEP",
                   help="Eb/N0 range in dB, inclusive (default 0:12:1)")
    t.add_argument("--margin", type=float, default=None, metavar="DB",
                   help="also print the limit, theory at Eb/N0 - DB")
    t.add_argument("--ber", type=float, action="append", metavar="P",
                   help="also print the Eb/N0 that gives this BER (repeatable)")

    v = sub.add_parser("vectors", help="golden vector files for benches that cannot run Python")
    vsub = v.add_subparsers(dest="vectors_command", required=True, parser_class=_Parser)
    e = vsub.add_parser("export", help="write golden vectors (bits + expected symbols) of a "
                        "convention: a YAML header with .npy and raw little-endian payloads")
    e.add_argument("--modulation", help="e.g. qpsk, 16qam (with --convention)")
    e.add_argument("--convention", help="e.g. 3gpp, ieee802.11 (with --modulation)")
    e.add_argument("--all", action="store_true",
                   help="every set shipped in the repository's vectors/ folder")
    e.add_argument("--from-report", metavar="DIR",
                   help="the failing inputs a check run kept in its --report folder "
                        "(DIR/counterexamples/), with the claimed convention's samples")
    e.add_argument("--samples-per-symbol", type=int, default=1, metavar="N",
                   help="hold each point N samples (default 1: symbols)")
    e.add_argument("--segments", metavar="NAMES",
                   help="comma-separated: labels, de-bruijn, prbs9 (default: labels, prbs9, and "
                        "de-bruijn up to 16 labels)")
    e.add_argument("--sample-format", choices=("float32", "int16"), default="float32",
                   help="of the raw sample file (default float32; int16 is Q15)")
    e.add_argument("--full-scale", type=float, default=1.0, metavar="X",
                   help="int16: the value of the integer 32768 (default 1.0)")
    e.add_argument("--out", metavar="DIR", default="modemverify-vectors",
                   help="folder to write into (default ./modemverify-vectors)")

    d = sub.add_parser("demo", help="run the bundled (invented) demo scenario end to end")
    d.add_argument("--out", metavar="DIR", default="modemverify-demo",
                   help="where the JUnit file and the report go (default ./modemverify-demo)")
    d.add_argument("--seed", type=_seed, default=DEFAULT_SEED,
                   help=f"seed of every random draw (default {DEFAULT_SEED})")

    st = sub.add_parser("selftest", help="certify on this machine that every check can fail: "
                        "mutants of the reference modem and the reference itself, judged")
    st.add_argument("--modulation", action="append", metavar="M",
                    help=f"repeatable (default {' '.join(DEFAULT_MODULATIONS)})")
    st.add_argument("--seeds", type=int, default=DEFAULT_SEEDS, metavar="N",
                    help=f"seeds per mutant and for the reference (default {DEFAULT_SEEDS})")
    st.add_argument("--seed", type=_seed, default=DEFAULT_SEED, help="the first seed")
    st.add_argument("--report", metavar="DIR", help="write index.html, certificate.json")
    st.add_argument("--junit", metavar="FILE", help="write the certificate as JUnit XML")
    return p


def main(argv: list[str] | None = None, *, signal_before: int | None = None) -> int:
    """Run the command line; ``signal_before`` is a stop signal that arrived while it loaded
    (see :mod:`modemverify._entry`): a check or compare run then stops at once, with its record.
    """
    args = build_parser().parse_args(argv)
    args.signal_before = signal_before
    commands = {"check": cmd_check, "plan": cmd_plan, "identify": cmd_identify,
                "compare": cmd_compare, "checks": cmd_checks, "theory": cmd_theory, "vectors": cmd_vectors_export,
                "demo": cmd_demo, "selftest": cmd_selftest}
    try:
        return commands[args.command](args)
    except ConfigError as exc:
        print(f"modemverify: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("modemverify: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:  # output piped into head, say: not an error of ours
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return EXIT_OK


def cmd_demo(args) -> int:
    out = check_output_folder(args.out, "--out")
    with OutputLock(out / "junit.xml"), OutputLock(out / "report"):
        return run_demo(out, seed=args.seed)


def cmd_selftest(args) -> int:
    mods = [m.lower() for m in args.modulation or DEFAULT_MODULATIONS]
    for m in mods:
        if m not in ("qpsk", "16qam", "64qam", "256qam"):
            raise UnknownNameError("square-QAM or QPSK modulation", m,
                                   ("qpsk", "16qam", "64qam", "256qam"), key="--modulation")
    if args.seeds < 1:
        raise ConfigError(f"--seeds={args.seeds}: expected a whole number >= 1")
    with _outputs(args):
        cert = certify(mods, seeds=args.seeds, seed=args.seed, report=args.report,
                       junit=args.junit, out=lambda line: print(line, flush=True))
    return EXIT_OK if cert.ok else EXIT_FAIL


def cmd_check(args) -> int:
    for name in args.only or []:
        if name not in ORACLES:
            raise UnknownNameError("check", name, ORACLES, key="--only")
    if args.cluster is not None and not dask_available():
        raise ConfigError(f"a Dask cluster ({args.cluster}) needs the optional extra: "
                          f"{INSTALL_HINT}", key="--cluster")
    if args.campaign:
        check_output_file(args.campaign, "--campaign")
    with _outputs(args):  # the files are loaded inside, under the signal handler
        _, code = run_and_report(args.devices, seed=args.seed, only=args.only,
                                 junit=args.junit, report=args.report,
                                 signal_before=args.signal_before, workers=args.workers,
                                 cluster=args.cluster, time_budget_s=args.time_budget,
                                 campaign=args.campaign, resume=args.resume)
    return code


def cmd_plan(args) -> int:
    worst = EXIT_OK
    for path in args.devices:
        spec = load_device(path)
        workers = Execution.of(spec, workers=args.workers).workers
        try:
            print(render_plan(plan(spec, workers=workers)), flush=True)
        except AdapterError as exc:
            print(f"{spec.name}: the device failed on the probe: {exc}", flush=True)
            worst = EXIT_FAIL
    return worst


@contextlib.contextmanager
def _outputs(args):
    """Check ``--junit`` and ``--report`` before anything runs, and hold them for this run."""
    with contextlib.ExitStack() as stack:
        if args.junit:
            stack.enter_context(OutputLock(check_output_file(args.junit, "--junit")))
        if args.report:
            stack.enter_context(OutputLock(check_output_folder(args.report, "--report")))
        yield


def _range(text: str) -> list[float]:
    try:
        parts = [float(x) for x in text.split(":")]
    except ValueError:
        parts = []
    if len(parts) == 1:
        return parts
    if len(parts) != 3 or parts[2] <= 0 or parts[1] < parts[0]:
        raise ConfigError(f"--ebn0={text!r}: expected START:STOP:STEP with STEP > 0, e.g. 0:12:1")
    n = int(round((parts[1] - parts[0]) / parts[2])) + 1
    return [round(parts[0] + i * parts[2], 10) for i in range(n)]


#: modulations a device file accepts that have a theory curve (the ones ``theory`` prints)
_THEORY = tuple(m for m in MODULATIONS if m in THEORY_MODULATIONS)


def cmd_theory(args) -> int:
    mod = args.modulation.lower()
    if mod not in _THEORY:
        raise UnknownNameError("modulation with a theory curve", mod, _THEORY,
                               key="modulation")
    grid = _range(args.ebn0)
    head = f"{'Eb/N0 dB':>8}  {'BER':>11}  {'SER':>11}"
    if args.margin is not None:
        head += f"  {'limit BER':>11}"
    print(f"{mod} over AWGN, {detection(mod)}, Gray labelling (exact; see "
          f"modemverify.schemes.theory for the formulas and references)")
    print(head)
    for x in grid:
        line = f"{x:8.2f}  {ber(mod, x):11.4e}  {ser(mod, x):11.4e}"
        if args.margin is not None:
            line += f"  {ber(mod, x - args.margin):11.4e}"
        print(line)
    for p in args.ber or []:
        if not 0 < p < 0.5:
            raise ConfigError(f"--ber={p!r}: expected a probability between 0 and 0.5")
        print(f"BER {p:g} needs Eb/N0 = {ebn0_for_ber(mod, p):.3f} dB")
    return EXIT_OK


def cmd_compare(args) -> int:
    a, b = load_device(args.a), load_device(args.b)
    with _outputs(args):
        return _compare(args, a, b)


def _compare(args, a, b) -> int:
    _, code = compare_and_report(a, b, seed=args.seed, junit=args.junit, report=args.report,
                                 evm_limit_percent=args.evm_limit,
                                 sample_error_percent=args.sample_error,
                                 spectrum_tolerance_db=args.spectrum_tolerance)
    return code


def cmd_checks(args) -> int:
    print("Every check that applies runs; set checks.<name>: false in a device file to turn one "
          "off, or give options:")
    # the names a 16QAM device with an RRC pulse gets (the BER points follow the modulation)
    example = parse_device({"name": "example", "adapter": "reference",
                            "scheme": {"modulation": "16qam", "convention": "3gpp",
                                       "samples_per_symbol": 8,
                                       "pulse": {"shape": "rrc", "rolloff": 0.35, "span": 10}}})
    for name, oracle in ORACLES.items():
        print(f"\n{name}: {oracle.summary}")
        names = oracle.verdict_names(example)
        example.scheme.streaming = True  # the names of a device with state, where they differ
        stateful = [n for n in oracle.verdict_names(example) if n not in names]
        example.scheme.streaming = False
        print(f"  verdicts: {', '.join(names)}"
              + (" (one per Eb/N0 point; these for 16qam's defaults)" if name == "ber" else "")
              + (f"; with scheme.streaming: {', '.join(stateful)}" if stateful else ""))
        for key, opt in oracle.options.items():
            default = "auto" if opt.default is None else opt.default
            print(f"  {key} (default {default!r}): {opt.help}")
    return EXIT_OK


def cmd_identify(args) -> int:
    spec = load_device(args.device)
    try:
        info = identify(spec)
    except AdapterError as exc:
        print(f"modemverify: the device failed while being probed: {exc}", file=sys.stderr)
        return EXIT_FAIL
    if args.json:
        print(json.dumps(info.to_json(), indent=2))
    else:
        print(info.render())
    return EXIT_OK


def cmd_vectors_export(args) -> int:
    if args.from_report is not None:
        if args.all or args.modulation or args.convention:
            raise ConfigError("give --from-report alone, without --all, --modulation or "
                              "--convention (the report's device files say the scheme)",
                              key="vectors export")
        paths, notes = export_kept(args.from_report, args.out)
        for note in notes:
            print(note)
        for path in paths:
            print(path)
        return EXIT_OK
    if args.all == bool(args.modulation and args.convention) or (
            not args.all and bool(args.modulation) != bool(args.convention)):
        raise ConfigError("give either --all or both --modulation and --convention (or "
                          "--from-report DIR)", key="vectors export")
    if args.all:
        sets = SHIPPED_SETS
    else:
        mod, conv = args.modulation.lower(), args.convention.lower()
        if mod not in MODULATIONS:
            raise ConfigError(f"--modulation={args.modulation!r}: expected one of "
                              f"{', '.join(MODULATIONS)}")
        if conv not in CONVENTIONS:
            raise ConfigError(f"--convention={args.convention!r}: expected one of "
                              f"{', '.join(CONVENTIONS)}")
        sets = [(conv, mod)]
    if args.samples_per_symbol < 1:
        raise ConfigError(f"--samples-per-symbol={args.samples_per_symbol}: expected >= 1")
    if not args.full_scale > 0:
        raise ConfigError(f"--full-scale={args.full_scale}: expected a number > 0")
    segments = (tuple(s.strip() for s in args.segments.split(",") if s.strip())
                if args.segments else None)
    paths = export_golden(args.out, sets, samples_per_symbol=args.samples_per_symbol,
                          segments=segments, sample_format=args.sample_format,
                          full_scale=args.full_scale)
    for path in paths:
        print(path)
    return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
