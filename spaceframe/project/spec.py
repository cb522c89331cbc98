"""The model file parsed: plain dataclasses with every value already in SI.

Made by :mod:`spaceframe.project.parse`, turned into a Model by
:mod:`spaceframe.project.build`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import numpy as np

from spaceframe.geometry import selection as sel
from spaceframe.materials import Material
from spaceframe.sections import Section
from spaceframe.units import InputUnits


@dataclass
class _Geometry:
    file: Path | None
    file_key: str
    file_units: str | None
    heal: bool
    tolerance: float
    options: dict[str, Any]
    nodes: np.ndarray
    members: np.ndarray
    groups: dict[str, np.ndarray]
    node_sets: dict[str, np.ndarray]
    panels: dict[str, list[np.ndarray]]
    #: The tolerance as written (None: the default), for messages.
    tolerance_raw: Any = None


@dataclass
class _Rule:
    where: str
    selector: sel.Selector | None  # None: every member (the default)
    selector_where: str
    section: str | None
    material: str | None


@dataclass
class _Support:
    where: str
    nodes: sel.Selector
    restrain: tuple[bool, bool, bool] | None
    spring: np.ndarray | None


@dataclass
class _SelfWeight:
    where: str
    factor: float
    g: float
    members: sel.Selector | None


@dataclass
class _Nodal:
    where: str
    nodes: sel.Selector
    force: np.ndarray
    total: bool


@dataclass
class _Area:
    where: str
    kind: Literal["pressure", "plan", "surface"]
    value: float
    panels: sel.Selector | None
    nodes: sel.Selector | None
    outline: np.ndarray | None


@dataclass
class _MemberLoad:
    where: str
    members: sel.Selector
    value: float
    per_length: bool = False  # lack of fit given as a length, not a strain


@dataclass
class _Settlement:
    where: str
    nodes: sel.Selector
    displacement: np.ndarray


@dataclass
class _Case:
    name: str
    where: str
    self_weight: _SelfWeight | None = None
    nodal: list[_Nodal] = field(default_factory=list)
    area: list[_Area] = field(default_factory=list)
    temperature: list[_MemberLoad] = field(default_factory=list)
    lack_of_fit: list[_MemberLoad] = field(default_factory=list)
    settlement: list[_Settlement] = field(default_factory=list)


@dataclass
class _Spec:
    path: Path
    title: str
    output: Path
    units: InputUnits
    geometry: _Geometry
    materials: dict[str, Material]
    sections: dict[str, Section]
    rules: list[_Rule]
    selections: dict[str, sel.Selector]
    supports: list[_Support]
    cases: dict[str, _Case]
    combinations: dict[str, dict[str, float]]
    envelopes: dict[str, list[str]]
    warnings: list[str]
    design: Any = None
    section_extras: dict[str, dict[str, Any]] = field(default_factory=dict)
    analysis: Any = None

