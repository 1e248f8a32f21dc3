"""A package's public names loaded from their modules on first use (PEP 562).

The engine, the planner and the document model all start light this way, so a command that
only reads a session imports neither the solver nor models it does not use.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from importlib import import_module
from typing import Any


def lazy_names(
    package: str,
    where: Mapping[str, tuple[str, str]],
    namespace: dict[str, Any],
    public: Iterable[str],
) -> tuple[Callable[[str], Any], Callable[[], list[str]]]:
    """The `__getattr__` and `__dir__` of `package`: name -> (its module, its attribute there)."""
    shown = set(public)

    def __getattr__(name: str) -> Any:
        """Load a public name from its module on first access; later lookups find it directly."""
        try:
            module, attribute = where[name]
        except KeyError:
            raise AttributeError(f"module {package!r} has no attribute {name!r}") from None
        value = getattr(import_module(f"{package}.{module}"), attribute)
        namespace[name] = value
        return value

    def __dir__() -> list[str]:
        """The module's names, public ones included before they are first loaded."""
        return sorted(set(namespace) | shown)

    return __getattr__, __dir__
