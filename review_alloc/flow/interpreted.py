"""The kernels run as plain Python while a background process compiles them, for small solves.

On a machine whose kernel cache is empty, compiling costs 10-30 s, far more than a small
session's whole solve takes uncompiled. `enter()` puts a switch in every kernel module's
namespace in place of each kernel that Python calls: while the kernels are neither compiled nor
loaded, a call whose arrays hold at most `SMALL_ELEMENTS` elements runs the kernel's *twin*, a
copy of its Python source whose globals name the other kernels' twins and plain-Python stand-ins
for numba's intrinsics (`trailing_zeros`). The first larger call (or any call once the cache is
filled) calls `leave()`: the switches go, and that call compiles or loads like any other.

A twin runs the very source of the kernel on the same arrays, so it returns the same flow and
potentials (`tests/flow/test_flow_interpreted.py` compares both with OR-Tools). Twins own their
globals, so a twin still running while another thread leaves stays whole; and since the switches
leave the namespaces before anything compiles in this process, numba only ever sees kernels.
"""

from __future__ import annotations

import threading
import types
from collections.abc import Callable, Iterable
from importlib import import_module
from typing import Any

KERNEL_MODULES = (
    "residual",
    "dinic",
    "potentials",
    "primal_dual",
    "kept",
    "tier_start",
    "cost_scaling",
    "circulation",
    "maxflow",
    "mincost",
)
"""The modules of `review_alloc.flow` that define kernels or bind them by name."""

SMALL_ELEMENTS = 50_000
"""Most array elements a kernel call may take and still run uncompiled. The demo workshop's
largest call takes about 15,000 (its whole uncompiled solve about 0.25 s of kernel time); a
min-cost flow of 50,000 elements (about 3,000 reviewer-paper pairs) takes about 1 s uncompiled,
and one plan makes at most four such calls, still well below a cold compile's 10-30 s."""


def trailing_zeros(word: Any) -> int:
    """The number of zero bits below the lowest set bit of a nonzero word (numba's intrinsic)."""
    value = int(word)
    return (value & -value).bit_length() - 1


_STAND_INS: dict[str, Callable[..., Any]] = {"trailing_zeros": trailing_zeros}
"""Plain-Python versions of the numba intrinsics the kernels call, by the intrinsic's name."""

_lock = threading.Lock()
_installed: dict[tuple[str, str], Any] = {}
"""(module, name) -> the dispatcher a switch replaced there, while switches are in."""
_on_leave: list[Callable[[], None]] = []


def _modules() -> list[types.ModuleType]:
    return [import_module(f"review_alloc.flow.{name}") for name in KERNEL_MODULES]


def _is_dispatcher(value: Any) -> bool:
    from numba.core.registry import CPUDispatcher

    return isinstance(value, CPUDispatcher)


def _stand_in(value: Any) -> Callable[..., Any] | None:
    from numba.core.extending import _Intrinsic

    if not isinstance(value, _Intrinsic):
        return None
    stand_in = _STAND_INS.get(value._name)
    if stand_in is None:
        # A kernel calling an intrinsic without a stand-in could not run uncompiled.
        raise RuntimeError(f"no plain-Python stand-in for numba intrinsic {value._name!r}")
    return stand_in


def python_twins(modules: Iterable[types.ModuleType]) -> dict[int, Callable[..., Any]]:
    """id(dispatcher) -> a plain-Python copy of its kernel, for every kernel of `modules`."""
    modules = list(modules)
    twins: dict[int, Callable[..., Any]] = {}
    namespaces: list[dict[str, Any]] = []
    for module in modules:
        namespace = dict(vars(module))
        namespaces.append(namespace)
        for value in vars(module).values():
            if _is_dispatcher(value) and value.py_func.__module__ == module.__name__:
                source = value.py_func
                twins[id(value)] = types.FunctionType(
                    source.__code__, namespace, source.__name__, source.__defaults__,
                    source.__closure__,
                )
    for namespace in namespaces:
        for name, value in list(namespace.items()):
            if _is_dispatcher(value):
                namespace[name] = twins[id(value)]
            else:
                stand_in = _stand_in(value)
                if stand_in is not None:
                    namespace[name] = stand_in
    return twins


def _size(args: tuple[Any, ...]) -> int:
    return sum(int(getattr(arg, "size", 0)) for arg in args)


class KernelSwitch:
    """Stands in a module's namespace for a kernel: its twin for small calls, else the kernel."""

    def __init__(self, kernel: Any, twin: Callable[..., Any], ready: Callable[[], bool]):
        self.kernel = kernel
        self.twin = twin
        self._ready = ready
        self.__name__ = kernel.__name__

    @property
    def signatures(self) -> list[Any]:
        """The compiled kernel's signatures (numba's `Dispatcher.signatures`)."""
        return list(self.kernel.signatures)

    def __call__(self, *args: Any) -> Any:
        """Run the twin while the call is small and the kernel not ready; else leave and run it."""
        if not self.kernel.signatures and _size(args) <= SMALL_ELEMENTS and not self._ready():
            return self.twin(*args)
        leave()
        return self.kernel(*args)


def enter(ready: Callable[[], bool], on_leave: Callable[[], None] | None = None) -> None:
    """Run small kernel calls uncompiled until `ready()` says the cache is filled.

    `on_leave` runs once when the switches go (before the call that made them go), for example
    to wait for the background compile and load its kernels.
    """
    with _lock:
        if _installed:
            return
        modules = _modules()
        twins = python_twins(modules)
        switches: dict[int, KernelSwitch] = {}
        for module in modules:
            for name, value in list(vars(module).items()):
                # Only kernels with a Python entry point are called from Python.
                if not _is_dispatcher(value) or value.targetoptions.get("no_cpython_wrapper"):
                    continue
                switch = switches.get(id(value)) or KernelSwitch(value, twins[id(value)], ready)
                switches[id(value)] = switch
                _installed[(module.__name__, name)] = value
                setattr(module, name, switch)
        if on_leave is not None:
            _on_leave.append(on_leave)


def active() -> bool:
    """Whether small kernel calls currently run uncompiled."""
    return bool(_installed)


def leave() -> None:
    """Put the compiled kernels back in every namespace (nothing compiles while switches are in)."""
    with _lock:
        if not _installed:
            return
        for (module_name, name), kernel in _installed.items():
            setattr(import_module(module_name), name, kernel)
        _installed.clear()
        callbacks = list(_on_leave)
        _on_leave.clear()
    for callback in callbacks:
        callback()
