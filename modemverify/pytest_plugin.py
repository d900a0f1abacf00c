"""The pytest plugin (entry point ``pytest11``): device files as test items, and a fixture.

``python -m pytest --modemverify port.yaml [more.yaml ...]`` collects one test item per verdict
of each device file, named as the JUnit output names its test cases (the verdict names of
:func:`modemverify.expected_names`, which depend on the device file alone, so collection never
runs the device). The first item of a file that runs checks the device once (with
``--modemverify-seed``, default the command line's seed) and keeps the
:class:`~modemverify.RunResult`; every item then reports its verdict as the command line's exit
code would: pass -> passed, fail or error -> failed with the verdict's reason, skipped ->
skipped, inconclusive -> failed when ``fail_on_inconclusive`` says it gates, else skipped. A bad
device file is a collection error whose text is the device-file message (file, key, expected).

With pytest-xdist every worker collects the same items in the same order; each item carries an
``xdist_group`` mark naming its device file, so ``--dist loadgroup`` (or ``--dist loadfile``)
keeps a device's items in one worker. Under any other distribution a worker checks a device at
most once, and the verdicts are the same in every worker (the seed fixes every draw).

The ``modemverify_check`` fixture runs :func:`modemverify.check` once per device file and seed
in a session and returns the ``RunResult``, for a team's own tests.

Importing this module is cheap (pytest loads it in every run once modemverify is installed):
the package is reached only through its lazy root door, and only when a device file is given or
the fixture is used.
"""

from __future__ import annotations

from pathlib import Path

import pytest

import modemverify

__all__ = [
    "DeviceFile", "VerdictItem", "pytest_addoption", "pytest_collection_modifyitems",
    "pytest_report_header", "modemverify_check",
]


def pytest_addoption(parser):
    group = parser.getgroup("modemverify", "modemverify: device files as tests")
    group.addoption("--modemverify", action="extend", nargs="+", default=[], metavar="DEVICE",
                    help="device files (YAML) to check: one test item per verdict")
    group.addoption("--modemverify-seed", type=_seed, default=None, metavar="N",
                    help="seed of every random draw of the checks (default: the command "
                         "line's default seed)")


def _seed(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise pytest.UsageError(f"--modemverify-seed={text!r}: expected a whole number") from None
    if value < 0:
        raise pytest.UsageError(f"--modemverify-seed={text!r}: expected a number >= 0")
    return value


def _run_seed(config) -> int:
    seed = config.getoption("modemverify_seed")
    return modemverify.DEFAULT_SEED if seed is None else seed


def pytest_report_header(config):
    if config.getoption("modemverify"):
        return f"modemverify {modemverify.__version__}, seed {_run_seed(config)}"
    return None


@pytest.hookimpl(tryfirst=True)  # before -k / -m deselect, and before xdist names the groups
def pytest_collection_modifyitems(session, config, items):
    for name in config.getoption("modemverify"):
        path = Path(name)
        if not path.is_absolute():
            path = config.invocation_params.dir / path
        items.extend(session.genitems(DeviceFile.from_parent(session, path=path)))


class DeviceFile(pytest.File):
    """One device file: its verdict names as items, and the run they share (at most one per
    process)."""

    def collect(self):
        self.spec = modemverify.load_device(self.path)
        grouped = self.config.pluginmanager.hasplugin("xdist")
        for name in modemverify.expected_names(self.spec):
            item = VerdictItem.from_parent(self, name=name)
            if grouped:
                item.add_marker(pytest.mark.xdist_group(self.nodeid))
            yield item

    def result(self):
        """The device's RunResult, checked on first use."""
        if getattr(self, "_result", None) is None:
            self._result = modemverify.check(self.spec, seed=_run_seed(self.config))
        return self._result

    def repr_failure(self, excinfo):
        if isinstance(excinfo.value, modemverify.ConfigError):
            return f"modemverify: error: {excinfo.value}"
        return super().repr_failure(excinfo)


class VerdictItem(pytest.Item):
    """One verdict of a device file's run, reported as the command line's exit code reads it."""

    def runtest(self):
        result = self.parent.result()
        verdict = result.verdict(self.name)
        text = verdict.render()
        if verdict.outcome == "pass":
            return
        if verdict.outcome == "skipped":
            _skip(verdict.reason)
        if verdict.outcome == "inconclusive":
            if result.gates(verdict):
                pytest.fail(f"inconclusive (fail_on_inconclusive: true): {text}", pytrace=False)
            _skip(f"inconclusive: {verdict.reason}")
        pytest.fail(text, pytrace=False)

    def reportinfo(self):
        return self.path, 0, f"{self.parent.spec.name}: {self.name}"


def _skip(reason: str):
    """Skip, reported at the device file's item (as a skip mark is), not at this module."""
    try:
        raise pytest.skip.Exception(reason, _use_item_location=True)
    except TypeError:  # a pytest without the keyword: the plain skip
        pytest.skip(reason)


@pytest.fixture
def modemverify_check(request):
    """``modemverify_check(device, *, seed=None, only=None) -> RunResult``.

    ``device`` is a device file (a relative path is taken from the requesting test file's
    folder) or a :class:`~modemverify.DeviceSpec`; the seed defaults to ``--modemverify-seed``.
    Each (file, seed, only) is checked once per session. A bad device file fails the test with
    the device-file message.
    """
    cache = request.config.stash.setdefault(_CACHE, {})
    here = Path(request.node.path).parent

    def run(device, *, seed: int | None = None, only=None):
        seed = _run_seed(request.config) if seed is None else seed
        only = tuple(only) if only else None
        if isinstance(device, (str, Path)):
            device = Path(device)
            key = ((here / device).resolve(), seed, only)
        else:
            key = (id(device), seed, only)
        if key not in cache:
            try:
                spec = modemverify.load_device(key[0]) if isinstance(device, Path) else device
            except modemverify.ConfigError as exc:
                pytest.fail(f"modemverify: error: {exc}", pytrace=False)
            cache[key] = (spec, modemverify.check(spec, seed=seed,
                                                  only=list(only) if only else None))
        return cache[key][1]

    return run


_CACHE = pytest.StashKey[dict]()
