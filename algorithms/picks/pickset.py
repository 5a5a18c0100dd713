"""The pick set: 3-D points ``(x, y, z)`` on mapped contacts, each with the id of the contact
feature it lies on and its source (``'dem'`` or ``'contours'``, :data:`SOURCES`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from strikeline.errors import InputError


#: The values of :attr:`PickSet.source`.
SOURCES = ("dem", "contours")


@dataclass(frozen=True)
class PickSet:
    """Elevation picks: 3D points on mapped contacts, with the contact id and the source.

    Attributes
    ----------
    xyz : ndarray, shape ``(n, 3)``, float64
        ``x, y`` (map coordinates) and ``z`` (elevation) of every pick, metres.
    contact_id : ndarray, shape ``(n,)``, int64
        The id the caller gave for the contact feature each pick lies on.
    source : ndarray, shape ``(n,)``, ``'<U8'``
        ``'dem'`` or ``'contours'``.

    Examples
    --------
    >>> import numpy as np
    >>> a = PickSet(np.zeros((2, 3)), np.array([7, 7]), np.array(["dem", "dem"]))
    >>> len(PickSet.concat(a, PickSet.empty())), a.counts_by_source()
    (2, {'dem': 2, 'contours': 0})
    """

    xyz: np.ndarray
    contact_id: np.ndarray
    source: np.ndarray

    def __post_init__(self):
        xyz = np.asarray(self.xyz, dtype=np.float64)
        if xyz.size == 0:
            xyz = xyz.reshape(0, 3)
        cid = np.asarray(self.contact_id).reshape(-1)
        src = np.asarray(self.source, dtype="<U8").reshape(-1)
        if xyz.ndim != 2 or xyz.shape[1] != 3:
            raise InputError(f"pick coordinates must be an (n, 3) array of x, y, z; got shape "
                             f"{xyz.shape}")
        if len(cid) != len(xyz) or len(src) != len(xyz):
            raise InputError(f"pick arrays differ in length: {len(xyz)} points, {len(cid)} "
                             f"contact ids, {len(src)} sources; give one of each per pick")
        if len(cid) and not np.issubdtype(cid.dtype, np.integer):
            raise InputError(f"contact ids must be integers, got dtype {cid.dtype}")
        bad = ~np.isin(src, SOURCES)
        if np.any(bad):
            raise InputError(f"pick source must be one of {', '.join(SOURCES)}; got "
                             f"{src[bad][0]!r}")
        object.__setattr__(self, "xyz", xyz)
        object.__setattr__(self, "contact_id", cid.astype(np.int64, copy=False))
        object.__setattr__(self, "source", src)

    def __len__(self) -> int:
        return len(self.xyz)

    @classmethod
    def empty(cls) -> "PickSet":
        """A pick set with no picks."""
        return cls(np.empty((0, 3)), np.empty(0, np.int64), np.empty(0, "<U8"))

    @classmethod
    def concat(cls, *sets: "PickSet") -> "PickSet":
        """All picks of several sets, in the order given (zero sets give an empty set)."""
        if not sets:
            return cls.empty()
        return cls(np.concatenate([s.xyz for s in sets]),
                   np.concatenate([s.contact_id for s in sets]),
                   np.concatenate([s.source for s in sets]))

    def counts_by_source(self) -> dict:
        """Number of picks per source: ``{'dem': n, 'contours': n}`` (both keys always present)."""
        return {s: int(np.count_nonzero(self.source == s)) for s in SOURCES}
