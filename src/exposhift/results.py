"""The common base of the typed results (services, replication report entries).

A result is a frozen dataclass with ``to_dict()`` (what ``--json`` prints, key order included).
It also reads as a read-only mapping over that dict (``result["key"]``), so callers written for
the dict results keep working while they move to the attributes.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from typing import Any


class ReadsAsMapping(Mapping):
    """A read-only mapping over ``to_dict()`` (computed once per result)."""

    def to_dict(self) -> dict[str, Any]:  # pragma: no cover - every subclass defines it
        raise NotImplementedError

    def _as_dict(self) -> dict[str, Any]:
        cached = self.__dict__.get("_dict_cache")
        if cached is None:
            cached = self.to_dict()
            object.__setattr__(self, "_dict_cache", cached)
        return cached

    def __getitem__(self, key: str) -> Any:
        return self._as_dict()[key]

    def __iter__(self) -> Iterator[str]:
        return iter(self._as_dict())

    def __len__(self) -> int:
        return len(self._as_dict())
