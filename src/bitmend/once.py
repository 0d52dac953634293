"""A cached property without a lock, for objects made once per frame."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, Generic, TypeVar

T = TypeVar("T")


class once(Generic[T]):  # lower case: used like the decorator it replaces
    """Like functools.cached_property: computed on first access, then kept in the
    instance's __dict__ (so later reads never reach this descriptor). Python 3.11's
    cached_property takes a lock on that first access, which costs more than the sizes it
    guards when a frame header or a decoded frame is made thousands of times a second;
    two threads racing here would only compute the same pure value twice."""

    def __init__(self, compute: Callable[[Any], T]) -> None:
        self._compute = compute
        self._name = compute.__name__
        self.__doc__ = compute.__doc__

    def __set_name__(self, owner: type, name: str) -> None:
        self._name = name

    def __get__(self, instance: Any, owner: type | None = None) -> T:
        if instance is None:
            return self  # type: ignore[return-value]
        value = instance.__dict__[self._name] = self._compute(instance)
        return value
