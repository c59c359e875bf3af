"""Named registries shared by the Python API, presets and the command line.

A registry maps a plain name to an object, or to a ``"module:attribute"``
string that is imported the first time the name is used (so optional heavy
dependencies load only when needed).  An unknown name is an
:class:`~instgen.errors.InputError` that lists the valid ones.

>>> colours = Registry("colour")
>>> colours.register("red", 1)
>>> colours.get("red")
1
"""

from __future__ import annotations

import importlib

from .errors import InputError


class Registry:
    def __init__(self, kind: str):
        self.kind = kind
        self._items: dict[str, object] = {}
        self._renamed: dict[str, str] = {}

    def register(self, name: str, obj=None):
        """Register ``obj`` under ``name``; usable as a decorator when obj is omitted."""
        if obj is None:
            def deco(o):
                self._items[name] = o
                return o
            return deco
        self._items[name] = obj
        return obj

    def rename(self, old: str, new: str) -> None:
        """Remember that ``old`` is now called ``new``: asking for ``old`` says so."""
        self._renamed[old] = new

    def renamed(self, name) -> str | None:
        """The current name of a retired ``name``, or None."""
        return self._renamed.get(name) if isinstance(name, str) else None

    def get(self, name: str):
        try:
            obj = self._items[name]
        except (KeyError, TypeError):
            if isinstance(name, str) and name in self._renamed:
                raise InputError(f"the {self.kind} {name!r} is now called {self._renamed[name]!r}") from None
            raise InputError(
                f"unknown {self.kind} {name!r}; choose one of: {', '.join(self.names())}"
            ) from None
        if isinstance(obj, str):
            module, _, attr = obj.partition(":")
            obj = getattr(importlib.import_module(module), attr)
            self._items[name] = obj
        return obj

    def names(self) -> list[str]:
        return sorted(self._items)

    def __contains__(self, name) -> bool:
        return name in self._items

    def __iter__(self):
        return iter(self.names())
