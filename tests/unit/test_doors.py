"""Public doors: every package's ``__all__`` is exactly what it offers.

As hypothesis checks its strategies module: a module's ``__all__`` lists exactly the public
names it defines, and a package door's ``__all__`` lists exactly the names of the submodules it
re-exports, each resolving to the object its submodule defines.
"""

from __future__ import annotations

import ast
import importlib
import pkgutil
from pathlib import Path

import pytest

import modemverify

PACKAGE = Path(modemverify.__file__).parent


def _modules():
    for info in pkgutil.walk_packages([str(PACKAGE)], "modemverify."):
        if not info.ispkg and not info.name.rsplit(".", 1)[1].startswith("_"):
            yield info.name


def _defined_public(path: Path) -> set[str]:
    names = set()
    for node in ast.parse(path.read_text()).body:
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            names.add(node.name)
        elif isinstance(node, ast.Assign):
            for t in node.targets:
                elts = t.elts if isinstance(t, ast.Tuple) else [t]
                names |= {e.id for e in elts if isinstance(e, ast.Name)}
        elif isinstance(node, ast.AnnAssign) and isinstance(node.target, ast.Name):
            names.add(node.target.id)
    return {n for n in names if not n.startswith("_")}


@pytest.mark.parametrize("name", sorted(_modules()))
def test_a_modules_all_lists_exactly_its_public_names(name):
    module = importlib.import_module(name)
    assert len(module.__all__) == len(set(module.__all__))
    assert set(module.__all__) == _defined_public(Path(module.__file__))


DOORS = ["modemverify.schemes", "modemverify.dsp", "modemverify.stats", "modemverify.vectors",
         "modemverify.adapters", "modemverify.report"]


@pytest.mark.parametrize("door", DOORS)
def test_a_door_offers_exactly_its_submodules_names(door):
    pkg = importlib.import_module(door)
    subs = {m.name: importlib.import_module(f"{door}.{m.name}")
            for m in pkgutil.iter_modules(pkg.__path__) if not m.name.startswith("_")}
    offered = set(pkg.__all__)
    assert len(pkg.__all__) == len(offered)
    # every offered name is its submodule's own object
    for n in offered:
        owners = [m for m in subs.values() if n in m.__all__]
        assert len(owners) == 1, (n, [m.__name__ for m in owners])
        assert getattr(pkg, n) is getattr(owners[0], n)
    # and a re-exported submodule gives all of its names, but never one that hides a submodule
    reexported = {s for s, m in subs.items() if offered & set(m.__all__)}
    expected = {n for s in reexported for n in subs[s].__all__} - set(subs)
    assert offered == expected


def test_the_root_door_resolves_every_name_and_stays_cheap():
    for n in modemverify.__all__:
        assert getattr(modemverify, n) is not None
    assert set(dir(modemverify)) >= set(modemverify.__all__) - {"__version__"}
    with pytest.raises(AttributeError, match="has no attribute 'nothing'"):
        modemverify.nothing  # noqa: B018
    # plugin and check authors import these from the package, not from private modules
    assert modemverify.ModemAdapter.__module__ == "modemverify"
    assert {"ModemAdapter", "Oracle", "Opt", "Bench", "Verdict"} <= set(modemverify.__all__)


def test_checks_and_adapters_are_found_by_their_modules():
    # adding a check is adding a module that defines ORACLE (its order says where it runs);
    # adding a built-in adapter is adding a module that defines ADAPTER
    from modemverify.adapters.registry import builtin_adapters
    from modemverify.oracles import ORACLES

    orders = [o.order for o in ORACLES.values()]
    assert orders == sorted(orders) and len(set(orders)) == len(orders)
    assert list(ORACLES)[:2] == ["finite", "length"] and list(ORACLES)[-2:] == ["ber", "llr"]
    assert set(builtin_adapters()) == {"python", "reference", "sharedlib", "process", "recorded"}
    assert all(cls.adapter_id == name for name, cls in builtin_adapters().items())
