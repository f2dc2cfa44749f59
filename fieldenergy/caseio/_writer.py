"""Write a :class:`Case` as ``case.toml``: plain SI numbers, angles in radians.

Reading the written file gives back an equal case (floats are written exactly). A polygon
read from a points file is written with its points inline.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path as FilePath

import numpy as np
from numpy.typing import NDArray

from fieldenergy.caseio._maps_writer import map_table, write_points_files
from fieldenergy.caseio._reader import CASE_FILE_NAME
from fieldenergy.errors import CaseError
from fieldenergy.model.case import Case, Circuit, Coil, Discretisation, RectSection, RoundSection, Section
from fieldenergy.model.paths import CirclePath, CurvePath, HelixPath, Path, PolygonPath, RacetrackPath, SaddlePath
from fieldenergy.model.transforms import LinearRepeat, Mirror, Repeat, Rotate, RotationalRepeat, Transform, Translate

_HEADER = "# Case file written by fieldenergy. Plain numbers are SI: m, A, ohm; angles in radians.\n\n"


def write_case(case: Case, folder: str | os.PathLike[str]) -> FilePath:
    """Write ``case`` to ``folder/case.toml``, replacing any file there atomically.

    Parameters
    ----------
    case
        The case to write.
    folder
        The case folder; created if missing.

    Returns
    -------
    The path of the written case file.

    Raises
    ------
    CaseError
        If the folder or file cannot be written.

    Examples
    --------
    >>> import tempfile
    >>> from fieldenergy.model import Case, Circuit, CirclePath, Coil, RoundSection
    >>> coil = Coil("loop", "c", RoundSection(0.001), CirclePath(0.05, [0, 0, 0], [0, 0, 1]))
    >>> case = Case("one loop", (Circuit("c", 2.0),), (coil,))
    >>> write_case(case, tempfile.mkdtemp()).name
    'case.toml'
    """
    import tomli_w  # only writing needs it

    target = FilePath(folder) / CASE_FILE_NAME
    content = (_HEADER + tomli_w.dumps(case_document(case))).encode("utf-8")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        write_points_files(case.maps, target.parent)
        handle, temporary = tempfile.mkstemp(dir=target.parent, prefix=".case-", suffix=".toml.tmp")
    except OSError as exc:
        raise CaseError(f"cannot write the case file: {exc.strerror}", path=str(target)) from None
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(content)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, target)
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.unlink(temporary)
        raise CaseError(f"cannot write the case file: {exc.strerror}", path=str(target)) from None
    return target


def case_document(case: Case) -> dict[str, object]:
    """The TOML document of ``case`` as nested dicts and lists of plain Python values."""
    document: dict[str, object] = {
        "title": case.title,
        "discretisation": _discretisation(case.discretisation),
        "circuit": [_circuit(c) for c in case.circuits],
        "coil": [_coil(c) for c in case.coils],
    }
    if case.maps:
        document["map"] = [map_table(spec) for spec in case.maps]
    return document


def _vec(values: NDArray[np.float64]) -> list[float]:
    return [float(v) for v in values]


def _discretisation(disc: Discretisation) -> dict[str, object]:
    out: dict[str, object] = {}
    if disc.sagitta is not None:
        out["sagitta"] = float(disc.sagitta)
    else:
        out["sagitta_fraction"] = float(disc.sagitta_fraction)
    out["max_angle"] = float(disc.max_angle)
    if disc.section_grid is not None:
        out["section_grid"] = [int(n) for n in disc.section_grid]
    return out


def _circuit(circuit: Circuit) -> dict[str, object]:
    out: dict[str, object] = {
        "name": circuit.name,
        "current": float(circuit.current),
        "resistance": float(circuit.resistance),
    }
    if circuit.dump_resistance is not None:
        out["dump_resistance"] = float(circuit.dump_resistance)
    if circuit.passive:
        out["passive"] = True
    return out


def _coil(coil: Coil) -> dict[str, object]:
    out: dict[str, object] = {
        "name": coil.name,
        "circuit": coil.circuit,
        "turns": float(coil.turns),
        "reverse": bool(coil.reverse),
    }
    if coil.reference is not None:
        out["frame_reference"] = _vec(coil.reference)
    out["section"] = _section(coil.section)
    out["path"] = _path(coil.path)
    if coil.transforms:
        out["transform"] = [_transform(t) for t in coil.transforms]
    if coil.repeat is not None:
        out["repeat"] = _repeat(coil.repeat)
    return out


def _section(section: Section) -> dict[str, object]:
    if isinstance(section, RoundSection):
        return {"shape": "round", "radius": float(section.radius)}
    if isinstance(section, RectSection):
        return {"shape": "rect", "width": float(section.width), "height": float(section.height)}
    raise TypeError(f"cannot write a section of type {type(section).__name__}")


def _path(path: Path) -> dict[str, object]:
    if isinstance(path, CirclePath):
        out: dict[str, object] = {"kind": "circle", "radius": float(path.radius), "center": _vec(path.center)}
        out["normal"] = _vec(path.normal)
        if path.start is not None:
            out["start"] = _vec(path.start)
        return out
    if isinstance(path, PolygonPath):
        return {"kind": "polygon", "points": [_vec(p) for p in path.points]}
    if isinstance(path, RacetrackPath):
        return {
            "kind": "racetrack",
            "straight": float(path.straight),
            "radius": float(path.radius),
            "center": _vec(path.center),
            "normal": _vec(path.normal),
            "direction": _vec(path.direction),
        }
    return _path_3d(path)


def _path_3d(path: Path) -> dict[str, object]:
    if isinstance(path, SaddlePath):
        return {
            "kind": "saddle",
            "radius": float(path.radius),
            "length": float(path.length),
            "opening": float(path.opening),
            "center": _vec(path.center),
            "axis": _vec(path.axis),
            "direction": _vec(path.direction),
        }
    if isinstance(path, HelixPath):
        out: dict[str, object] = {"kind": "helix", "radius": float(path.radius), "pitch": float(path.pitch)}
        out.update(turns=float(path.turns), center=_vec(path.center), axis=_vec(path.axis))
        if path.start is not None:
            out["start"] = _vec(path.start)
        return out
    if isinstance(path, CurvePath):
        return {"kind": "curve", "x": path.x, "y": path.y, "z": path.z, "t": [float(path.t0), float(path.t1)]}
    raise TypeError(f"cannot write a path of type {type(path).__name__}")


def _transform(transform: Transform) -> dict[str, object]:
    if isinstance(transform, Translate):
        return {"translate": _vec(transform.offset)}
    if isinstance(transform, Rotate):
        rotate = {"axis": _vec(transform.axis), "angle": float(transform.angle), "origin": _vec(transform.origin)}
        return {"rotate": rotate}
    if isinstance(transform, Mirror):
        return {"mirror": {"normal": _vec(transform.normal), "origin": _vec(transform.origin)}}
    raise TypeError(f"cannot write a transform of type {type(transform).__name__}")


def _repeat(repeat: Repeat) -> dict[str, object]:
    if isinstance(repeat, RotationalRepeat):
        return {"count": int(repeat.count), "axis": _vec(repeat.axis), "origin": _vec(repeat.origin)}
    if isinstance(repeat, LinearRepeat):
        return {"count": int(repeat.count), "step": _vec(repeat.step)}
    raise TypeError(f"cannot write a repeat of type {type(repeat).__name__}")
