"""The pattern models by name: one line per model file, and temporary additions for tests.

A model is a module of this package that defines ``MODEL``, a
:class:`~jjpattern.physics.models.spec.PatternModelSpec`; listing its module name in
``_MODULES`` is all it takes to make it a ``--geometry`` choice, a fit model and a
synthetic pattern. Nothing here imports numpy.
"""

from __future__ import annotations

import importlib
from collections.abc import Iterator, Mapping, Set
from contextlib import contextmanager
from contextvars import ContextVar

from ...errors import InputError
from .spec import PatternModelSpec, structure_problems

#: One line per model: the module of this package that defines ``MODEL``.
_MODULES = (
    "rectangular",
    "circular",
    "two_channel",
    "zero_pi",
    "long_inline",
    "long_overlap",
)

# Models added by ``registered``: an immutable tuple per context, reset on leaving the
# ``with`` block, so nothing outlives the block or leaks into another thread.
_TEMPORARY: ContextVar[tuple[PatternModelSpec, ...]] = ContextVar("jjpattern_models",
                                                                 default=())


_BUILTIN = tuple(importlib.import_module(f"{__package__}.{m}").MODEL for m in _MODULES)
if len({s.name for s in _BUILTIN}) != len(_BUILTIN):
    raise ValueError(f"two model files use the same name: {[s.name for s in _BUILTIN]}")


def _all() -> tuple[PatternModelSpec, ...]:
    return _BUILTIN + _TEMPORARY.get()


def model_names() -> tuple[str, ...]:
    """Names of the known models, registry order first, then temporary ones."""
    return tuple(s.name for s in _all())


def get_model(name: str) -> PatternModelSpec:
    """The model called ``name``.

    Raises
    ------
    InputError
        For an unknown name, listing the known ones.
    """
    for spec in _all():
        if spec.name == name:
            return spec
    raise InputError(f"unknown geometry {name!r}; use one of {', '.join(model_names())}")


@contextmanager
def registered(spec: PatternModelSpec):
    """Make ``spec`` a known model inside a ``with`` block (tests, notebooks).

    The addition is visible to this thread (and to asyncio tasks started inside
    the block) only; worker processes or threads do not see it. A model for
    everyone is a line in ``_MODULES``.
    """
    if not isinstance(spec, PatternModelSpec):
        raise TypeError("registered() takes a PatternModelSpec")
    problems = structure_problems(spec)
    if problems:
        raise ValueError(f"pattern model {spec.name!r}: {'; '.join(problems)}")
    if spec.name in model_names():
        raise ValueError(f"a pattern model called {spec.name!r} is already registered")
    token = _TEMPORARY.set(_TEMPORARY.get() + (spec,))
    try:
        yield spec
    finally:
        _TEMPORARY.reset(token)


def all_references() -> dict[str, str]:
    """Citation key -> text over every model; one key must mean one citation everywhere."""
    out: dict[str, str] = {}
    for spec in _all():
        for key, text in spec.references.items():
            if out.setdefault(key, text) != text:
                raise ValueError(f"reference {key!r} differs between models; use one text")
    return out


class ModelView(Mapping):
    """Read-only ``name -> pick(spec)`` over the current registry (temporary models too)."""

    def __init__(self, pick):
        self._pick = pick

    def __getitem__(self, name):
        try:
            spec = get_model(name)
        except InputError:
            raise KeyError(name) from None
        return self._pick(spec)

    def __iter__(self) -> Iterator[str]:
        return iter(model_names())

    def __len__(self) -> int:
        return len(_all())

    def __repr__(self) -> str:
        return f"{type(self).__name__}({list(self)})"


class PeriodicNames(Set):
    """Read-only set of the names of periodic models, over the current registry."""

    def __contains__(self, name) -> bool:
        return any(s.name == name and s.periodic for s in _all())

    def __iter__(self) -> Iterator[str]:
        return iter([s.name for s in _all() if s.periodic])

    def __len__(self) -> int:
        return sum(s.periodic for s in _all())

    def __repr__(self) -> str:
        return f"{type(self).__name__}({set(self)})"
