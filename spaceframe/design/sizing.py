"""Lightest passing section per group from a catalogue, re-analysed until it settles.

Forces in an indeterminate frame change with the members' stiffness, so each
iteration solves the model, picks for every sized group the lightest
catalogue section whose members all pass every check under every result,
applies the choice and solves again, until no choice changes.
"""

from __future__ import annotations

import csv
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.design.steel import (
    SLENDERNESS_COMPRESSION,
    SLENDERNESS_TENSION,
    buckling_curve_for,
    buckling_reduction,
)
from spaceframe.errors import ModelError
from spaceframe.sections import Section, circular_hollow

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["CHS_SERIES_MM", "SizingResult", "chs_catalogue", "read_catalogue", "size_groups"]

#: Outside diameter and wall thickness, mm, of circular hollow sections in the
#: dimension series of EN 10210-2 / EN 10219-2 — a selection, from memory:
#: check the sizes stocked before use.
CHS_SERIES_MM: tuple[tuple[float, float], ...] = (
    (26.9, 3.2), (33.7, 3.2), (42.4, 3.2), (48.3, 3.2), (48.3, 4.0), (60.3, 3.2),
    (60.3, 4.0), (76.1, 3.2), (76.1, 4.0), (88.9, 3.2), (88.9, 4.0), (88.9, 5.0),
    (114.3, 3.6), (114.3, 5.0), (114.3, 6.3), (139.7, 5.0), (139.7, 6.3), (139.7, 8.0),
    (168.3, 5.0), (168.3, 6.3), (168.3, 8.0), (168.3, 10.0), (193.7, 6.3), (193.7, 8.0),
    (193.7, 10.0), (219.1, 6.3), (219.1, 8.0), (219.1, 10.0), (219.1, 12.5), (244.5, 8.0),
    (244.5, 10.0), (244.5, 12.5), (273.0, 8.0), (273.0, 10.0), (273.0, 12.5), (323.9, 8.0),
    (323.9, 10.0), (323.9, 12.5), (355.6, 10.0), (355.6, 12.5), (406.4, 10.0),
    (406.4, 12.5), (457.0, 10.0), (457.0, 12.5), (508.0, 12.5),
)


def chs_catalogue() -> list[Section]:
    """The shipped circular hollow sections (see :data:`CHS_SERIES_MM`), lightest first."""
    secs = [circular_hollow(f"CHS {d:g}x{t:g}", d / 1000, t / 1000) for d, t in CHS_SERIES_MM]
    return sorted(secs, key=lambda s: s.area)


def read_catalogue(path: str | Path) -> list[Section]:
    """Read a catalogue CSV with columns ``name, diameter_mm, thickness_mm``.

    Raises
    ------
    ModelError
        Naming the file and line of a missing column or bad value.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise ModelError(f"{p}: cannot read the catalogue ({exc.strerror})") from None
    rows = list(csv.DictReader(text.splitlines()))
    need = {"name", "diameter_mm", "thickness_mm"}
    if not rows or not need <= set(rows[0]):
        raise ModelError(f"{p}: a catalogue needs the columns {', '.join(sorted(need))}")
    out = []
    for i, row in enumerate(rows, start=2):
        try:
            d, t = float(row["diameter_mm"]), float(row["thickness_mm"])
        except (TypeError, ValueError):
            raise ModelError(f"{p}, line {i}: diameter and thickness must be numbers") from None
        try:
            out.append(circular_hollow(row["name"], d / 1000, t / 1000))
        except ModelError as exc:
            raise ModelError(f"{p}, line {i}: {exc}") from None
    return sorted(out, key=lambda s: s.area)


@dataclass
class SizingResult:
    """What sizing chose.

    Attributes
    ----------
    sections : dict
        Group → chosen section.
    iterations : list of dict
        Per iteration, group → (section name, largest utilisation before the change).
    converged : bool
    no_section : dict
        Group → number of its members that no catalogue section makes pass
        (those groups get the largest section, and the frame does not pass).
    """

    sections: dict[str, Section]
    iterations: list[dict[str, tuple[str, float]]] = field(default_factory=list)
    converged: bool = False
    no_section: dict[str, int] = field(default_factory=dict)


def _group_utilisation(
    model: Model, ids: np.ndarray, tension: np.ndarray, compression: np.ndarray,
    catalogue: list[Section], fabrication: str, gamma_M0: float, gamma_M1: float,
) -> np.ndarray:
    """(sections, members) governing utilisation, slenderness failures as inf."""
    area = np.array([s.area for s in catalogue])[:, None]
    inertia = np.array([s.second_moment for s in catalogue])[:, None]
    fy = np.asarray(model.yield_strength)[ids][None, :]
    e_mod = np.asarray(model.E)[ids][None, :]
    l_cr = (np.asarray(model.buckling_length_factor)[ids] * model.lengths[ids])[None, :]
    curves = _tube_curves(fy.ravel(), fabrication)
    lam = l_cr / np.sqrt(inertia / area)
    lam_bar = lam / (np.pi * np.sqrt(e_mod / fy))
    chi = buckling_reduction(lam_bar, np.broadcast_to(curves, lam_bar.shape))
    n_pl = area * fy / gamma_M0  # EN 1993-1-1 (6.6), (6.10)
    n_b = np.minimum(chi * area * fy / gamma_M1, n_pl)  # (6.47)
    u = np.maximum(tension[None, :] / n_pl, compression[None, :] / n_b)
    limit_c = np.asarray(model.slenderness_limit)[ids][None, :]
    limit_c = np.where(np.isfinite(limit_c), limit_c, SLENDERNESS_COMPRESSION)
    too_slender = ((compression[None, :] > 0) & (lam > limit_c)) | (lam > SLENDERNESS_TENSION)
    return np.where(too_slender, np.inf, u)


def size_groups(
    model: Model,
    groups: list[str],
    catalogue: list[Section] | None = None,
    *,
    solve: Callable[[Model], Mapping[str, Any]] | None = None,
    names: list[str] | None = None,
    fabrication: str = "hot",
    max_iterations: int = 10,
    gamma_M0: float = 1.0,
    gamma_M1: float = 1.0,
) -> SizingResult:
    """Size the named groups in place (areas, second moments, buckling curves).

    Self-weight added with :meth:`Model.add_self_weight` follows the new areas.

    Parameters
    ----------
    model : Model
        Its members need E and yield strength; it is changed in place.
    groups : list of str
        Member groups to size; each gets one section.
    catalogue : list of Section, optional
        Candidates (default :func:`chs_catalogue`), circular hollow sections.
    solve : callable, optional
        Model → results mapping (default ``model.solve()``).
    names : list of str, optional
        Results to check (default every combination, else every case).
    fabrication : {"hot", "cold"}
        For the buckling curve of the catalogue's tubes (EN 1993-1-1 Table 6.2).

    Raises
    ------
    ModelError
        On an unknown or empty group, an empty catalogue, or a member
        without yield strength.
    """
    cat = chs_catalogue() if catalogue is None else sorted(catalogue, key=lambda s: s.area)
    if not cat:
        raise ModelError("size_groups: the catalogue is empty")
    for g in groups:
        if g not in model.groups or model.groups[g].size == 0:
            raise ModelError(f"size_groups: group {g!r} does not exist or has no members")
    ids_all = np.concatenate([model.groups[g] for g in groups])
    if not np.all(np.isfinite(np.asarray(model.yield_strength)[ids_all])):
        raise ModelError("size_groups: every sized member needs a yield strength")
    run = solve or (lambda mm: mm.solve())
    out = SizingResult(sections={})
    chosen: dict[str, int] = {}
    for _ in range(max_iterations):
        results = run(model)
        use = names or [n for n in results if results[n].kind == "combination"] or list(results)
        forces = np.stack([np.asarray(results[n].axial_forces) for n in use])
        tension = np.maximum(forces.max(axis=0), 0.0)
        compression = np.maximum(-forces.min(axis=0), 0.0)
        step: dict[str, tuple[str, float]] = {}
        new: dict[str, int] = {}
        out.no_section = {}
        for g in groups:
            ids = model.groups[g]
            u = _group_utilisation(model, ids, tension[ids], compression[ids], cat,
                                   fabrication, gamma_M0, gamma_M1)
            ok = np.flatnonzero(np.all(u <= 1.0, axis=1))
            if ok.size:
                k = int(ok[0])
            else:
                k = len(cat) - 1
                out.no_section[g] = int(np.sum(u[k] > 1.0))
            new[g] = k
            step[g] = (cat[k].name, float(np.max(u[k])))
        out.iterations.append(step)
        if new == chosen:
            out.converged = True
            break
        chosen = new
        for g, k in new.items():
            _apply_section(model, model.groups[g], cat[k], fabrication)
    out.sections = {g: cat[k] for g, k in chosen.items()}
    return out


def _tube_curves(fy: np.ndarray, fabrication: str) -> np.ndarray:
    """Table 6.2 curve of a catalogue tube per member, looked up once per distinct f_y."""
    grades, inverse = np.unique(fy, return_inverse=True)
    table = np.array([buckling_curve_for("chs", fabrication, float(f)) for f in grades],
                     dtype=object)
    return table[inverse.ravel()]


def _apply_section(model: Model, ids: np.ndarray, sec: Section, fabrication: str) -> None:
    curve = _tube_curves(np.asarray(model.yield_strength)[ids], fabrication)
    model.set_member_properties(
        ids, area=sec.area, second_moment=sec.second_moment, buckling_curve=curve
    )
