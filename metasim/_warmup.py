"""Compile the kernels a run needs ahead of time, in helper processes, when numba's cache is cold.

numba compiles a kernel at its first call and keeps the machine code in its cache (``__pycache__``
next to the source, or ``NUMBA_CACHE_DIR``); a run that finds a kernel there loads it in
milliseconds. On the first run a study needs several kernels, each taking seconds to compile, one
after the other, while the machine's other cores wait. :func:`start` looks up which kernels of a
plan have no cache entry and, for those, starts helper processes (``python -m metasim._warmup``)
that compile them into the cache in the order the run needs them, spread over the cores, while
the run itself imports the library and reads its inputs. Before the run calls a kernel a helper
is working on, it waits for it (:func:`wait`, called by :func:`metasim._threads.run_in_parts` and
by the entry points that call kernels directly); the run then loads it from the cache. Nothing
changes in the values: the machine code is the one the run would have compiled.

The look-up imports no kernel module (that would import the layers, xarray and colour-science
first, and start the helpers seconds later): it compiles the kernel module's source to bytecode
without running it and asks numba's own cache classes about a stand-in function with that
bytecode, file and line (the three things numba keys its cache by, with the argument types and
the CPU).

Each kernel module lists its kernels' argument types in ``SIGNATURES`` (the types the entry points
pass; ``tests/test_kernels.py`` checks that a study calls exactly these), so the helpers compile
exactly what the run will ask for. Only the command-line interface (and the test suite's session
warm-up) starts helpers; the library never starts processes on its own.
"""

from __future__ import annotations

import ast
import functools
import importlib
import os
import subprocess
import sys
import threading
import types
from pathlib import Path

#: The kernels of a study (display calibration, gamut, mismatch, summaries, intervals) in two
#: helpers of about equal compile time (about 10 s of CPU each), each in the order a study first
#: calls them. The fused pass alone in the second: numba stores each compiled callee in the cache as
#: soon as it is compiled, so its CIELAB and CIE 2000 column loops are there by the time the first
#: helper reaches the kernels that share them (CIE 2000 after the summaries, to leave it the time).
#: The CIELAB clipping chain is not here: a study clips a few rows, interpreted
#: (:mod:`metasim.display._kernels.clip`).
STUDY = (
    ("metasim.colorimetry._kernels.sums:_products", "metasim.display._kernels.qp:_equality_qp_rows",
     "metasim.colorimetry._kernels.cielab:_lab_chunks", "metasim.statistics._kernels.rowstats:_sorted_rows",
     "metasim.statistics._kernels.pooled:resample_counts", "metasim.statistics._kernels.pooled:first_pass",
     "metasim.statistics._kernels.pooled:gather_windows", "metasim.statistics._kernels.pooled:walk",
     "metasim.colorimetry._kernels.ciede2000:_blocks", "metasim.colorimetry._kernels.cielab:_lab_rows"),
    ("metasim.colorimetry._kernels.fused:_pair_rows_driven",),
)

#: Every kernel with declared types (the test suite's session warm-up): the study's, then the others,
#: and the sweep's compiled pass in a third helper (its row statistics first: they share callees).
EVERY = (
    STUDY[0] + ("metasim.colorimetry._kernels.sums:_apply", "metasim.display._kernels.clip:_clip_rows",
                "metasim.display._kernels.qp:_box_qp_rows"),
    STUDY[1] + ("metasim.colorimetry._kernels.fused:_pair_rows",),
    ("metasim.statistics._kernels.order:summarise_rows", "metasim.sweep._kernels.designs:reference_columns",
     "metasim.sweep._kernels.designs:design_statistics"),
)

_ROOT = Path(__file__).resolve().parent
_pending: dict[str, threading.Event] = {}  # "module:function" -> set when its helper has compiled it
_helpers: list[subprocess.Popen] = []


def _kernel(name: str):
    """The numba dispatcher of kernel ``module:function`` (importing its module) and its declared types."""
    module, function = name.split(":")
    return getattr(importlib.import_module(module), function), signature(name)


def _argument_types(spelled) -> tuple:
    """numba types of a kernel's arguments from their spellings ("float64[:, ::1]", "int64", ...)."""
    from numba.core import sigutils

    arguments, _ = sigutils.normalize_signature(f"void({', '.join(spelled)})")
    return tuple(arguments)


def _source(module: str) -> Path:
    return _ROOT.joinpath(*module.split(".")[1:]).with_suffix(".py")


@functools.lru_cache(maxsize=None)
def _module_code(module: str) -> tuple[types.CodeType, dict]:
    """The module's bytecode as an import would compile it (not run), and its ``SIGNATURES``."""
    path = _source(module)
    text = path.read_text(encoding="utf-8")
    declared = {}
    for node in ast.parse(text).body:
        if isinstance(node, ast.Assign) and any(getattr(t, "id", None) == "SIGNATURES" for t in node.targets):
            declared = ast.literal_eval(node.value)
    return compile(text, str(path), "exec", dont_inherit=True), declared


def signature(name: str) -> tuple:
    """The declared argument types (spellings) of kernel ``module:function``."""
    module, function = name.split(":")
    return _module_code(module)[1][function]


def _stand_in(name: str) -> types.FunctionType:
    """A function with the kernel's bytecode, source file, line and names, made without running its module."""
    module, function = name.split(":")
    code = next(c for c in _module_code(module)[0].co_consts if isinstance(c, types.CodeType) and c.co_name == function)
    stand_in = types.FunctionType(code, {"__name__": module})
    stand_in.__module__, stand_in.__qualname__ = module, function
    return stand_in


def is_cached(name: str) -> bool:
    """True when numba's cache holds machine code of kernel ``module:function`` for its declared
    types on this CPU (looked up without importing the kernel's module)."""
    try:
        from numba.core.caching import FunctionCache
        from numba.core.registry import cpu_target

        cache = FunctionCache(_stand_in(name))
        index = cache._cache_file._load_index()
        key = cache._index_key(_argument_types(signature(name)), cpu_target.target_context.codegen())
    except (AttributeError, ImportError, RuntimeError, StopIteration):  # a numba without this layout: compile
        return False
    return key in index


def start(plan=STUDY) -> bool:
    """Start helper processes for the kernels of ``plan`` that are not cached (one per group of the
    plan, with two or more cores); True if any kernel of the plan is to be compiled. The helpers'
    kernels are marked pending until a helper reports them compiled."""
    from numba import config

    from metasim._threads import kernel_threads

    if config.DISABLE_JIT:
        return False  # nothing is compiled
    groups = [[name for name in group if not is_cached(name) and name not in _pending] for group in plan]
    groups = [group for group in groups if group]
    compiling = bool(groups) or any(not event.is_set() for event in _pending.values())
    if not groups or kernel_threads() < 2:  # one core: helpers would only take turns with the run
        return compiling
    for group in groups:
        events = {name: threading.Event() for name in group}
        _pending.update(events)
        helper = subprocess.Popen([sys.executable, "-m", "metasim._warmup", *group], stdout=subprocess.PIPE,
                                  stderr=subprocess.DEVNULL, text=True, env=dict(os.environ))
        _helpers.append(helper)
        threading.Thread(target=_follow, args=(helper, events), daemon=True).start()
    return compiling


def _follow(helper: subprocess.Popen, events: dict) -> None:
    """Set each kernel's event as its helper reports it; all of them when the helper ends."""
    for line in helper.stdout:
        event = events.get(line.strip())
        if event is not None:
            event.set()
    helper.wait()
    for event in events.values():  # finished or failed: the run compiles whatever is missing itself
        event.set()


def wait(*kernels) -> None:
    """Block until the helpers have compiled ``kernels`` (numba dispatchers), if one is working on them."""
    if not _pending:
        return
    for kernel in kernels:
        function = getattr(kernel, "py_func", kernel)  # a plain function when numba's JIT is off
        name = f"{function.__module__}:{function.__name__}"
        event = _pending.get(name)
        if event is not None:
            event.wait()
            _pending.pop(name, None)


def on_compile(callback):
    """Call ``callback()`` whenever numba compiles a kernel in this process (a cache miss); returns
    a function that stops it."""
    import numba.core.event as numba_events

    class _Listener(numba_events.Listener):
        def on_start(self, event):
            callback()

        def on_end(self, event):
            pass

    listener = _Listener()
    numba_events.register("numba:compile", listener)
    return lambda: numba_events.unregister("numba:compile", listener)


def finish() -> None:
    """Wait until every helper this process started has ended (its kernels are in the cache)."""
    for helper in list(_helpers):
        helper.wait()
    stop()


def stop() -> None:
    """End the helper processes this process started (at exit or after an error)."""
    for helper in _helpers:
        if helper.poll() is None:
            helper.terminate()
    for event in list(_pending.values()):
        event.set()
    _pending.clear()
    _helpers.clear()


def _bare_packages() -> None:
    """Helper process: the layer packages as empty shells, so importing a kernel module runs only the
    kernel modules (numpy and numba), not the layers' ``__init__`` (xarray, scipy, ...). The
    compiled code and its cache entry are the same: numba keys them by source file and bytecode."""
    for layer in ("colorimetry", "display", "metamerism", "statistics", "sweep"):
        shell = types.ModuleType(f"metasim.{layer}")
        shell.__path__ = [str(_ROOT / layer)]
        shell.__package__ = shell.__name__
        sys.modules.setdefault(shell.__name__, shell)


def _compile(names) -> None:
    """Helper process: compile each kernel for its signature (numba stores it in the cache)."""
    _bare_packages()
    for name in names:
        dispatcher, spelled = _kernel(name)
        try:
            dispatcher.compile(_argument_types(spelled))
        finally:
            print(name, flush=True)


if __name__ == "__main__":
    _compile(sys.argv[1:])
