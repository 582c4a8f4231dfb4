"""Layering: the domain and storage layers never pull in the widget or app stack.

Every module of the package outside ``prescribe.ui`` is found by walking the package, so a
new module is checked without anyone listing it, and a listed module that goes missing
fails instead of being dropped.
"""

from __future__ import annotations

import pkgutil
import subprocess
import sys

import prescribe

FORBIDDEN = ("ipywidgets", "bqplot", "voila")
#: Modules that must exist: the checks below would be hollow without them.
CORE = ("prescribe.records", "prescribe.errors", "prescribe.screening.rules", "prescribe.screening",
        "prescribe.catalogue", "prescribe.loading.dose", "prescribe.loading.mechanics", "prescribe.planning",
        "prescribe.safety", "prescribe.planning.options", "prescribe.clinic.caseload",
        "prescribe.handout", "prescribe.store")


def non_ui_modules() -> list[str]:
    names = [m.name for m in pkgutil.walk_packages(prescribe.__path__, "prescribe.")]
    return sorted(n for n in names if not (n == "prescribe.ui" or n.startswith("prescribe.ui."))
                  and ".migrations" not in n)


def _widget_modules_after_import(modules: list[str]) -> tuple[int, str, str]:
    code = ("import importlib, sys\n"
            f"for name in {modules!r}:\n"
            "    importlib.import_module(name)\n"
            f"bad = sorted(m for m in sys.modules if m.split('.')[0] in {FORBIDDEN!r})\n"
            "print(','.join(bad))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    return proc.returncode, proc.stdout.strip(), proc.stderr


def test_the_walk_finds_the_core_modules():
    found = set(non_ui_modules())
    missing = [m for m in CORE if m not in found]
    assert not missing, f"core modules missing from the package: {missing}"


def test_no_module_outside_ui_imports_widgets():
    modules = non_ui_modules()
    assert len(modules) >= len(CORE)
    rc, bad, err = _widget_modules_after_import(modules)
    assert rc == 0, err
    if bad:  # name the culprits: import each alone
        culprits = [m for m in modules if _widget_modules_after_import([m])[1]]
        raise AssertionError(f"{', '.join(culprits)} import {bad}")


#: Modules above the domain: storage, handouts, the app, the command line, and the modules that
#: compose the domain with the store (the demo, the caseload what-if, the template library).
ABOVE_DOMAIN = ("prescribe.store", "prescribe.handout", "prescribe.ui", "prescribe.cli")
COMPOSERS = ("prescribe.demo", "prescribe.clinic")


def _under(name: str, packages: tuple[str, ...]) -> bool:
    return any(name == p or name.startswith(p + ".") for p in packages)


def _loaded_after_importing(modules: list[str], prefixes: tuple[str, ...]) -> str:
    """The modules under ``prefixes`` loaded once ``modules`` are imported in a fresh interpreter."""
    code = ("import importlib, sys\n"
            f"for name in {modules!r}:\n"
            "    importlib.import_module(name)\n"
            f"print(','.join(sorted(m for m in sys.modules if m.startswith({prefixes!r}))))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return proc.stdout.strip()


def test_the_domain_never_imports_the_store_the_handout_or_the_app():
    domain = [m for m in non_ui_modules() if not _under(m, ABOVE_DOMAIN + COMPOSERS)]
    assert "prescribe.safety" in domain and "prescribe.planning" in domain
    assert not any(_under(m, COMPOSERS) for m in domain)
    found = _loaded_after_importing(domain, ABOVE_DOMAIN)
    assert found == "", f"the domain imports {found}"


#: What the science of loading may not import: the screening, the planner, the sessions, the
#: sensors, the store, the handout, the app and the command line (it stands on numpy, the
#: records, the errors and the exercise catalogue only).
ABOVE_LOADING = ("prescribe.screening", "prescribe.planning", "prescribe.sessions",
                 "prescribe.sensor", "prescribe.store", "prescribe.handout", "prescribe.ui", "prescribe.cli")


def test_the_loading_science_imports_nothing_above_the_catalogue():
    loading = [m for m in non_ui_modules() if m == "prescribe.loading" or m.startswith("prescribe.loading.")]
    assert {"prescribe.loading.dose", "prescribe.loading.mechanics", "prescribe.loading.bone_loads",
            "prescribe.loading.explain"} <= set(loading)
    found = _loaded_after_importing(loading, ABOVE_LOADING)
    assert found == "", f"prescribe.loading imports {found}"


def _package_imports(package: str) -> dict[str, set[str]]:
    """Each module of ``package`` (walked) and the modules of the same package it imports,
    read from its source: every import statement, at the top, in a function or under
    ``TYPE_CHECKING``."""
    import ast
    import importlib.util

    pkg = importlib.import_module(package)
    names = [package] + [m.name for m in pkgutil.walk_packages(pkg.__path__, package + ".")
                         if ".migrations" not in m.name]
    graph: dict[str, set[str]] = {}
    for name in names:
        spec = importlib.util.find_spec(name)
        tree = ast.parse(open(spec.origin, encoding="utf-8").read())
        is_pkg = spec.submodule_search_locations is not None
        base = name if is_pkg else name.rsplit(".", 1)[0]
        found = set()
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom):
                if node.level:
                    parts = base.split(".")
                    root = ".".join(parts[:len(parts) - node.level + 1])
                    target = f"{root}.{node.module}" if node.module else root
                else:
                    target = node.module or ""
                found.add(target)
                found.update(f"{target}.{a.name}" for a in node.names)
            elif isinstance(node, ast.Import):
                found.update(a.name for a in node.names)
        graph[name] = {t for t in found if t in names and t != name}
    return graph


def test_no_two_store_modules_import_each_other_in_a_loop():
    graph = _package_imports("prescribe.store")
    assert {"prescribe.store.api", "prescribe.store.engine", "prescribe.store.people"} <= set(graph)
    loops = []

    def visit(node: str, path: list[str]) -> None:
        for nxt in sorted(graph[node]):
            if nxt in path:
                loops.append(path[path.index(nxt):] + [nxt])
            elif nxt != "prescribe.store":   # the package's front imports its modules, never the reverse
                visit(nxt, path + [nxt])

    for start in graph:
        if start != "prescribe.store":
            visit(start, [start])
    assert not loops, f"import loops in the store: {loops[0]}"


def planning_modules() -> list[str]:
    """The planner and the safety check's package (its own, imported by every door)."""
    import prescribe.planning
    import prescribe.safety
    names = [m.name for pkg in (prescribe.planning, prescribe.safety)
             for m in pkgutil.walk_packages(pkg.__path__, pkg.__name__ + ".")]
    return ["prescribe.planning", "prescribe.safety", *sorted(names)]


def test_planning_never_imports_pandas():
    """The planner and its safety check stay free of pandas: tables of a plan are built
    above them (prescribe.tables), so the planner loads fast in the app and at the command line."""
    modules = planning_modules()
    assert {"prescribe.planning.builder", "prescribe.safety", "prescribe.planning.options",
            "prescribe.planning.templates"} <= set(modules)
    code = ("import importlib, sys\n"
            f"for name in {modules!r}:\n"
            "    importlib.import_module(name)\n"
            "print(','.join(sorted(m for m in sys.modules if m.split('.')[0] == 'pandas')))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    if proc.stdout.strip():  # name the culprits: import each alone
        culprits = [m for m in modules if subprocess.run(
            [sys.executable, "-c", f"import sys, {m}; print('pandas' in sys.modules)"],
            capture_output=True, text=True, timeout=300).stdout.strip() == "True"]
        raise AssertionError(f"{', '.join(culprits)} import pandas")
