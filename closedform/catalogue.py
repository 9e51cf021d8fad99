"""A registry of named definitions kept in one package, one module per entry.

Both the model registry (``closedform.models``) and the shape registry
(``closedform.shapes``) are a :class:`Catalogue`: entries register themselves when their module
is imported, :meth:`Catalogue.load` imports every module of the package (those of
``built_in`` first, in that order, which is the order messages list them in; then any others
by name), and entries registered from outside the package (tests) can be removed again.
"""

from __future__ import annotations

import difflib
import pkgutil
from collections.abc import Callable, Iterable
from importlib import import_module
from typing import Any, Generic, TypeVar

T = TypeVar("T")


class Catalogue(Generic[T]):
    """Named definitions of one ``kind`` ("model", "shape"), in registration order."""

    def __init__(self, kind: str, built_in: tuple[str, ...],
                 validate: Callable[[T], None] | None = None) -> None:
        self.kind, self.built_in, self.validate = kind, built_in, validate
        self.entries: dict[str, T] = {}
        self.packaged: set[str] = set()

    def register(self, definition: T) -> T:
        """Add a definition (a name may be registered once)."""
        name = definition.name
        if name in self.entries:
            raise ValueError(f"{self.kind} {name!r} is registered already")
        if self.validate is not None:
            self.validate(definition)
        self.entries[name] = definition
        return definition

    def unregister(self, name: str) -> None:
        """Remove a definition registered from outside the package (tests)."""
        if name in self.packaged:
            raise ValueError(f"{self.kind} {name!r} is built in")
        self.entries.pop(name, None)

    def names(self) -> tuple[str, ...]:
        return tuple(self.entries)

    def get(self, name: str) -> T:
        return self.entries[name]

    def known(self, name: Any) -> bool:
        return isinstance(name, str) and name in self.entries

    def close_match(self, name: Any) -> str | None:
        close = difflib.get_close_matches(str(name), self.names(), n=1)
        return close[0] if close else None

    def load(self, package: str, path: Iterable[str]) -> None:
        """Import every module of ``package`` (a new entry is a new file) and mark what they
        registered as built in."""
        others = sorted(info.name for info in pkgutil.iter_modules(path)
                        if info.name not in self.built_in)
        for module in (*self.built_in, *others):
            import_module(f"{package}.{module}")
        self.packaged.update(self.entries)
