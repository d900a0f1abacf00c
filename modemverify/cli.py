"""The ``modemverify`` command line.

Exit codes: 0 every verdict passed; 1 a verdict failed or errored (or was inconclusive where the
device file says that gates); 2 bad usage or a bad device file.
"""

from __future__ import annotations

import argparse
import json
import signal
import sys
from pathlib import Path

from . import __version__
from .errors import AdapterError, ConfigError

EXIT_OK, EXIT_FAIL, EXIT_USAGE = 0, 1, 2


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


def build_parser() -> argparse.ArgumentParser:
    from .runner import DEFAULT_SEED

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

    i = sub.add_parser("identify", help="describe a device's mapping without a claim")
    i.add_argument("device", metavar="DEVICE.yaml")
    i.add_argument("--json", action="store_true", help="print JSON")

    d = sub.add_parser("demo", help="run the bundled (invented) demo scenario end to end")
    d.add_argument("--out", metavar="DIR", default="modemverify-demo",
                   help="where the JUnit file and the report go (default ./modemverify-demo)")
    d.add_argument("--seed", type=_seed, default=DEFAULT_SEED)
    return p


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    try:
        if args.command == "check":
            return cmd_check(args)
        if args.command == "identify":
            return cmd_identify(args)
        if args.command == "demo":
            from .demo import run_demo

            return run_demo(Path(args.out), seed=args.seed)
    except ConfigError as exc:
        print(f"modemverify: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("modemverify: interrupted", file=sys.stderr)
        return 130
    return EXIT_USAGE


def _terminate(signum, frame):  # SIGTERM behaves like Ctrl-C: finish writing what was measured
    raise KeyboardInterrupt


def run_and_report(specs, *, seed, only=None, junit=None, report=None, stream=None):
    """Run the specs, print summaries, write JUnit and the report; return (results, exit code).

    JUnit is rewritten after every device, and on an interrupt with what finished, so CI always
    finds a complete, valid file.
    """
    from .report.console import render_run, render_totals
    from .report.junit import write_junit
    from .runner import RunResult, check

    stream = stream or sys.stdout
    results = []
    previous = signal.signal(signal.SIGTERM, _terminate)
    interrupted = False
    try:
        for spec in specs:
            partial: list = []
            try:
                result = check(spec, seed=seed, only=only, on_verdict=partial.append)
            except KeyboardInterrupt:
                interrupted = True
                result = RunResult(spec, partial, seed)
                result.notes.append("run interrupted; verdicts after this point are missing")
                results.append(result)
                break
            results.append(result)
            print(render_run(result), file=stream, flush=True)
            if junit:
                write_junit(results, junit)
    finally:
        signal.signal(signal.SIGTERM, previous)
        if junit and results:
            write_junit(results, junit)
        if report and results:
            from .report.html import write_report

            write_report(results, report)
    print(render_totals(results), file=stream)
    if junit:
        print(f"JUnit: {junit}", file=stream)
    if report:
        print(f"Report: {Path(report) / 'index.html'}", file=stream)
    if interrupted:
        return results, 130
    return results, (EXIT_OK if all(r.ok for r in results) else EXIT_FAIL)


def cmd_check(args) -> int:
    from .config import load_device
    from .oracles import ORACLES
    from .errors import UnknownNameError

    for name in args.only or []:
        if name not in ORACLES:
            raise UnknownNameError("check", name, ORACLES, key="--only")
    specs = [load_device(p) for p in args.devices]  # validate every file before running any
    _, code = run_and_report(specs, seed=args.seed, only=args.only, junit=args.junit,
                             report=args.report)
    return code


def cmd_identify(args) -> int:
    from .config import load_device
    from .identify import identify, render_identification

    spec = load_device(args.device)
    try:
        info = identify(spec)
    except AdapterError as exc:
        print(f"modemverify: the device failed while being probed: {exc}", file=sys.stderr)
        return EXIT_FAIL
    if args.json:
        print(json.dumps(info, indent=2))
    else:
        print(render_identification(info))
    return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
