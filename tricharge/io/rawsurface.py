"""What a mesh reader returns (:class:`RawSurface`), and the errors readers share."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputFileError, MeshError


@dataclass
class RawSurface:
    """What a reader found, before conversion.

    points : (n, 3) in file units
    triangles : (m, 3) int
    groups : (m,) int index into ``group_names``, or None when the file has no groups
    group_names : one name per group
    aliases : other references for a group (e.g. its tag number) -> group name
    notes : what was skipped or changed, for the user
    in_metres : the points are already in metres (CAD files that carry their unit)
    cad : the CAD faces the triangles were meshed from (:class:`~tricharge.io.cadproject.CadFaces`)
    """

    points: np.ndarray
    triangles: np.ndarray
    groups: np.ndarray | None = None
    group_names: list[str] = field(default_factory=list)
    aliases: dict[str, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    in_metres: bool = False
    cad: object = None


def unreadable(path: Path, kind: str, exc: BaseException) -> InputFileError:
    """The error for a file a format library could not read; ``exc`` its exception."""
    detail = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return InputFileError(f"{path}: not a readable {kind} file ({detail[:200]}); check the export settings")


def no_triangles(path: Path, found: str) -> MeshError:
    """The error for a file without triangles; ``found`` says what it has instead."""
    return MeshError(f"{path}: the mesh has no triangles ({found}); export the surfaces as a triangle mesh")
