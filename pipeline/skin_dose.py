"""Peak skin dose (PSD) of a fluoroscopically guided procedure from its irradiation events. Pure.

Method (after Jones AK, Pasciak AS. Calculating the peak skin dose resulting from
fluoroscopically guided interventions. Part I: Methods. J Appl Clin Med Phys 2011;12(4):3670):
the patient is an elliptical cylinder lying on the table (supine head-first unless the event
reports Patient Orientation Modifier / Patient Table Relationship, PS3.16 CID 20 / CID 21:
prone, lateral decubitus and feet-first turn the phantom, see `patient_rotation`); each event's
beam is projected from its source position (positioner angles and Distance Source to
Isocenter, PS3.16 TID 10003C) onto the cells of the phantom's surface that face the source,
and each cell inside the collimated field receives

    D = Ka,r x (d_RP / d_cell)^2 x BSF(kVp, Cu, field side) x f_tissue/air x T_table (if through it)

where Ka,r is the event's Dose (RP) and d_RP the source-to-reference-point distance (IEC
60601-2-43 interventional reference point, 15 cm from the isocentre towards the source, unless
the report defines another). Cell doses add over events; the PSD is the largest cell.

Room frame (mm): origin at the isocentre, x towards the left of a head-first supine patient, y
towards the head end of the table, z up. The skin-dose map is unrolled in the patient's own
frame (front midline via the patient's right; along towards the head) whatever the position.
PS3.3 C.8.7.5 angles give the detector direction d = (sin a cos b, sin b, cos a cos b) (a: +LAO,
b: +cranial); the source sits at -SOD x d. Table Height Position is device-specific in DICOM:
this module takes it as the table-top height relative to the isocentre (positive up), plus a
configurable offset; without it the isocentre is assumed at the phantom's centre.

An event without the geometry (angles or Distance Source to Isocenter) is added at its
reference-point value times the same BSF and f factors to the peak (no inverse-square, no table
transmission): an upper bound, and the method says so.

Every factor here carries its source; values recalled rather than read in the publication are
marked "from memory" and must be checked before clinical use. An estimate of this kind is
typically uncertain by about +-40 % (Jones & Pasciak 2011, from memory) and depends on the phantom.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field
from functools import cache, lru_cache

import numpy as np

__all__ = ["BSF_SOURCE", "F_SOURCE", "F_TISSUE_AIR", "REFERENCE_ADULT", "SkinDoseEvent",
           "SkinDoseResult", "SkinDoseSettings", "Phantom", "backscatter_factor",
           "backscatter_table", "beam_direction", "compute_skin_dose", "patient_rotation",
           "phantom_for", "UNCERTAINTY_NOTE"]

# Backscatter factor B (air kerma at the surface of an ICRU-tissue phantom with the phantom
# over that without it), by tube voltage, added copper filtration (3.1 mm Al inherent) and side
# of the square field at the skin: Benmakhlouf H, Bouchard H, Fransson A, Andreo P.
# Backscatter factors and mass energy-absorption coefficient ratios for diagnostic radiology
# dosimetry. Phys Med Biol 2011;56:7179-7204 (Monte Carlo; the 60-120 kV, 0-0.9 mm Cu rows of
# its ICRU-tissue table). The numbers were read, through the search tool, from the tabulation
# distributed with the PySkinDose research code (rvbCMTS/PySkinDose,
# src/pyskindose/table_data/correction_medium_and_backscatter.csv at commit 3cb23ea, whose
# loader credits Benmakhlouf et al.), not from the original article: check against the article before
# clinical use. queries/seeds/skin_backscatter.csv holds them; queries/seeds/skin_dose_factors.md
# says what was read where. Looked up with scipy's RegularGridInterpolator (linear), clamped at
# the table's edges; an unknown copper filtration takes the largest B over the tabulated
# filtrations (an upper bound, said so in the result).
BSF_SOURCE = ("backscatter factor B(kVp, added Cu, field side at the skin), ICRU tissue: "
              "Benmakhlouf et al. 2011, Phys Med Biol 56:7179 (60-120 kV, 0-0.9 mm Cu, field "
              "sides 5-35 cm), as tabulated in the PySkinDose repository (not read in the original article); "
              "linear interpolation, clamped at the table edges; unknown Cu -> largest B over Cu")
# Ratio of mass energy-absorption coefficients, ICRU-44 soft tissue to dry air: 1.06. NIST
# (Hubbell & Seltzer, NIST Standard Reference Database 126, Table 4) gives 1.0514 at 30 keV,
# 1.0561 at 40 keV, 1.0639 at 50 keV, 1.0733 at 60 keV, 1.0872 at 80 keV (ratios of the
# tabulated mu_en/rho, read through the search tool from a copy of the NIST tables in the
# kingtaurus/CTSim repository, physicsdata/materials); 1.06 is the ratio near 45 keV, the
# effective energy of copper-filtered interventional beams (that energy range: from memory).
F_TISSUE_AIR = 1.06
F_SOURCE = ("(mu_en/rho) soft tissue/air = 1.06: NIST SRD 126 (Hubbell & Seltzer), ICRU-44 soft "
            "tissue over dry air, 1.056 at 40 keV to 1.073 at 60 keV; effective energy of "
            "interventional beams about 45 keV (from memory)")
# ICRP Publication 89 reference adult male, 1.76 m and 73 kg (from memory).
REFERENCE_ADULT = (1.76, 73.0)
UNCERTAINTY_NOTE = ("an estimate: typically within about +-40 % (Jones & Pasciak 2011, from "
                    "memory), more where the phantom, table height convention or field size "
                    "differ from the patient's; clinical follow-up by the responsible physician")
# Patient positions the projection supports (PS3.16 CID 20 Patient Orientation Modifier, CID 21
# Patient Equipment Relationship): rotation of the patient about the table's long axis
# (degrees; +90 puts the patient's left side down) and whether the head points to -y.
_ROLL_DEG = {"supine": 0.0, "prone": 180.0, "left lateral decubitus": 90.0,
             "right lateral decubitus": -90.0}
_FEET_FIRST = {"headfirst": False, "head first": False, "feet-first": True, "feet first": True}


def _seed_path():
    from queries import ROOT
    return ROOT / "seeds" / "skin_backscatter.csv"


@cache
def backscatter_table() -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The tabulated backscatter factors (queries/seeds/skin_backscatter.csv).

    Returns
    -------
    kvp_kv, added_cu_mm, field_side_cm, bsf
        The grid axes and B on the grid, shape (n_kvp, n_cu, n_side).
    """
    with _seed_path().open(newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    sides = sorted(float(k.split("_")[2].removesuffix("cm")) for k in rows[0] if k.startswith("bsf_"))
    kvp = sorted({float(r["kvp_kv"]) for r in rows})
    cu = sorted({float(r["added_cu_mm"]) for r in rows})
    values = np.full((len(kvp), len(cu), len(sides)), np.nan)
    for r in rows:
        i, j = kvp.index(float(r["kvp_kv"])), cu.index(float(r["added_cu_mm"]))
        values[i, j] = [float(r[f"bsf_side_{s:g}cm"]) for s in sides]
    if np.isnan(values).any():
        raise ValueError(f"{_seed_path()}: the backscatter grid has gaps")
    return np.array(kvp), np.array(cu), np.array(sides), values


@cache
def _interpolator():
    from scipy.interpolate import RegularGridInterpolator
    kvp, cu, side, values = backscatter_table()
    return RegularGridInterpolator((kvp, cu, side), values, method="linear")


@dataclass(frozen=True, slots=True)
class SkinDoseSettings:
    """Configurable parts of the model; each default states its source."""

    cell_mm: float = 10.0
    # table + pad transmission for a beam through them: from memory, measured values of about
    # 0.7-0.85 are reported for interventional tables with pad (Jones & Pasciak 2011 Part I
    # measured their own); measure it for each unit
    table_transmission: float = 0.75
    table_transmission_source: str = ("table + pad transmission 0.75 (from memory: reported "
                                      "measurements 0.7-0.85; Jones & Pasciak 2011 Part I); "
                                      "configurable, measure per unit")
    table_half_width_mm: float = 250.0     # common practice, no source (50 cm tabletop)
    table_height_offset_mm: float = 0.0    # device-specific Table Height Position origin
    lateral_to_ap_ratio: float = 1.5       # trunk width : thickness, common practice, no source
    trunk_mass_fraction: float = 0.45      # from memory (ICRP 89 organ masses), approximate
    trunk_length_fraction: float = 0.30    # of body height, from memory, approximate
    rp_from_isocentre_mm: float = 150.0    # IEC 60601-2-43 interventional reference point


@dataclass(frozen=True, slots=True)
class Phantom:
    """Elliptical cylinder: semi-axes (lateral a, antero-posterior b) and length, in mm."""

    semi_lateral_mm: float
    semi_ap_mm: float
    length_mm: float
    basis: str


@dataclass(frozen=True, slots=True)
class SkinDoseEvent:
    """What the model needs of one irradiation event (public irradiation_event columns)."""

    dose_rp_mgy: float
    kvp: float | None = None
    primary_angle_deg: float | None = None
    secondary_angle_deg: float | None = None
    source_to_isocenter_mm: float | None = None
    source_to_detector_mm: float | None = None
    source_to_rp_mm: float | None = None
    field_area_cm2: float | None = None
    table_longitudinal_mm: float | None = None
    table_lateral_mm: float | None = None
    table_height_mm: float | None = None
    reference_point_definition: str | None = None
    added_cu_mm: float | None = None              # copper filtration (X-Ray Filters, TID 10003B)
    patient_orientation_modifier: str | None = None  # CID 20 meaning: supine, prone, ...
    patient_table_relationship: str | None = None    # CID 21 meaning: headfirst, feet-first

    @property
    def has_geometry(self) -> bool:
        """Angles and the source-to-isocentre distance are known."""
        return None not in (self.primary_angle_deg, self.secondary_angle_deg,
                            self.source_to_isocenter_mm)


@dataclass(frozen=True)
class SkinDoseResult:
    """Cell doses on the unrolled phantom surface and the peak skin dose, with provenance."""

    psd_mgy: float
    dose_map_mgy: np.ndarray          # (n_around, n_along)
    around_mm: np.ndarray             # arc length from the front midline via the right side
    along_mm: np.ndarray              # phantom longitudinal coordinate (towards the head +)
    n_events: int
    n_events_with_geometry: int
    ka_r_total_mgy: float
    upper_bound_part_mgy: float       # added by events without geometry
    phantom: Phantom
    method: str
    factors: dict[str, str] = field(default_factory=dict)
    event_factors: list[dict] = field(default_factory=list)

    @property
    def psd_to_ka_r(self) -> float | None:
        """PSD over the summed reference air kerma."""
        return self.psd_mgy / self.ka_r_total_mgy if self.ka_r_total_mgy > 0 else None

    def factor_rows(self) -> list[dict]:
        """One row per factor: range over the events' central rays, and its source."""
        rows = []
        for name, key in (("inverse_square", "inverse_square"), ("backscatter", "bsf"),
                          ("f_tissue_air", "f"), ("table_transmission", "table_transmission")):
            values = [f[key] for f in self.event_factors if key in f]
            rows.append({"factor": name, "n_events": len(values),
                         "value_min": min(values) if values else None,
                         "value_max": max(values) if values else None,
                         "source": self.factors.get(name, "Jones & Pasciak 2011 Part I (method)")})
        return rows

    @property
    def is_upper_bound(self) -> bool:
        """Some events had no geometry and were added at their reference-point value."""
        return self.n_events_with_geometry < self.n_events


def phantom_for(height_m: float | None, weight_kg: float | None,
                settings: SkinDoseSettings = SkinDoseSettings()) -> Phantom:
    """Elliptical-cylinder trunk sized from height and weight (else the reference adult).

    Parameters
    ----------
    height_m, weight_kg : float or None
        Patient Size (0010,1020) and Patient's Weight (0010,1030); either missing -> both
        from the ICRP Publication 89 reference adult male (from memory).
    settings : SkinDoseSettings

    Returns
    -------
    Phantom
        Cross-section area = trunk mass / (1 g/cm3 x trunk length); a : b = lateral_to_ap_ratio.
    """
    if height_m and weight_kg and 0.4 <= height_m <= 2.5 and 2.0 <= weight_kg <= 300.0:
        h, w, basis = height_m, weight_kg, f"patient {height_m:.2f} m, {weight_kg:.0f} kg"
    else:
        h, w = REFERENCE_ADULT
        basis = "reference adult 1.76 m, 73 kg (ICRP 89, from memory): height or weight unknown"
    area_mm2 = settings.trunk_mass_fraction * w * 1e6 / (settings.trunk_length_fraction * h * 1e3)
    b = math.sqrt(area_mm2 / (math.pi * settings.lateral_to_ap_ratio))
    return Phantom(settings.lateral_to_ap_ratio * b, b, h * 1e3, basis)


def backscatter_factor(kvp: float | None, field_side_cm: float,
                       added_cu_mm: float | None = None) -> float:
    """Backscatter factor B from the tabulated grid (`BSF_SOURCE`), linear, clamped.

    Parameters
    ----------
    kvp : float or None
        Tube voltage of the event; unknown -> 80 kV (common practice, no source).
    field_side_cm : float
        Side of the (square) field at the skin.
    added_cu_mm : float or None
        Added copper filtration; unknown -> the largest B over the tabulated filtrations.

    Returns
    -------
    float
    """
    return float(_bsf(kvp, np.asarray(field_side_cm, dtype=float), added_cu_mm))


def _bsf(kvp: float | None, side_cm: np.ndarray, cu_mm: float | None) -> np.ndarray:
    """Vectorised over field sides."""
    grid_kvp, grid_cu, grid_side, _ = backscatter_table()
    k = float(np.clip(80.0 if kvp is None else kvp, grid_kvp[0], grid_kvp[-1]))
    side = np.clip(side_cm, grid_side[0], grid_side[-1])
    cus = grid_cu if cu_mm is None else [float(np.clip(cu_mm, grid_cu[0], grid_cu[-1]))]
    f = _interpolator()
    values = [f(np.stack(np.broadcast_arrays(k, c, side), -1).reshape(-1, 3)) for c in cus]
    return np.max(values, axis=0).reshape(np.shape(side))


def patient_rotation(orientation_modifier: str | None,
                     table_relationship: str | None) -> tuple[np.ndarray, str]:
    """Patient frame -> room frame, and a note of what was assumed.

    Patient frame: x towards the patient's left, y towards the head, z anterior. Room frame: the
    head-first-supine patient's (x towards the table side where that patient's left lies, y
    towards the head end, z up). Prone turns the patient 180 deg about the table's long axis
    (the anterior skin faces down, towards an under-table tube); a lateral decubitus turns it
    90 deg; feet-first turns it 180 deg about the vertical (head towards -y).

    Parameters
    ----------
    orientation_modifier : str or None
        Patient Orientation Modifier term (PS3.16 CID 20): supine, prone, left / right lateral
        decubitus are modelled; absent or other -> supine, and the note says so.
    table_relationship : str or None
        Patient Table Relationship term (CID 21): headfirst or feet-first; absent or other ->
        head-first, and the note says so.

    Returns
    -------
    rotation : ndarray, shape (3, 3)
        Room coordinates = rotation @ patient coordinates.
    note : str
        E.g. ``"prone, feet-first"`` or ``"supine, head-first (orientation not reported:
        supine assumed; ...)"``.
    """
    notes = []
    modifier = (orientation_modifier or "").strip().lower()
    relation = (table_relationship or "").strip().lower()
    if modifier not in _ROLL_DEG:
        notes.append((f"orientation {orientation_modifier!r} not modelled" if modifier
                      else "orientation not reported") + ": supine assumed")
        modifier = "supine"
    if relation not in _FEET_FIRST:
        notes.append((f"table relationship {table_relationship!r} not modelled" if relation
                      else "table relationship not reported") + ": head-first assumed")
        relation = "headfirst"
    phi = math.radians(_ROLL_DEG[modifier])
    roll = np.array([[math.cos(phi), 0.0, math.sin(phi)], [0.0, 1.0, 0.0],
                     [-math.sin(phi), 0.0, math.cos(phi)]])
    turn = np.diag([-1.0, -1.0, 1.0]) if _FEET_FIRST[relation] else np.eye(3)
    label = f"{modifier}, {'feet-first' if _FEET_FIRST[relation] else 'head-first'}"
    return np.round(turn @ roll, 12), label + (f" ({'; '.join(notes)})" if notes else "")


def beam_direction(primary_deg: float, secondary_deg: float) -> np.ndarray:
    """Unit vector from the isocentre to the detector (PS3.3 C.8.7.5 signs), room frame."""
    return np.array(_direction(primary_deg, secondary_deg))


def _direction(primary_deg: float, secondary_deg: float) -> tuple[float, float, float]:
    """`beam_direction` as three floats."""
    a, b = math.radians(primary_deg), math.radians(secondary_deg)
    return math.sin(a) * math.cos(b), math.sin(b), math.cos(a) * math.cos(b)


def _surface(phantom: Phantom, cell_mm: float):
    """Cell centres: parametric angle with a node at the posterior midline, y with a node at 0."""
    a, b = phantom.semi_lateral_mm, phantom.semi_ap_mm
    perimeter = math.pi * (3 * (a + b) - math.sqrt((3 * a + b) * (a + 3 * b)))  # Ramanujan
    n_around = max(8, int(round(perimeter / cell_mm)))
    theta = -math.pi / 2 + 2 * math.pi * np.arange(n_around) / n_around
    half = int(phantom.length_mm / 2 // cell_mm)
    along = cell_mm * np.arange(-half, half + 1)
    dx, dz = -a * np.sin(theta), b * np.cos(theta)
    step = np.hypot(dx, dz) * 2 * math.pi / n_around
    from_back = np.concatenate([[0.0], np.cumsum(step[:-1])])
    # unrolled from the front midline via the patient's right, so the back sits mid-map
    around = np.mod(from_back + step.sum() / 2, step.sum())
    return theta, along, around


def _rp_distance(e: SkinDoseEvent, source_z: float, d_z: float, table_z: float,
                 s: SkinDoseSettings) -> tuple[float, str]:
    sod = float(e.source_to_isocenter_mm)
    if e.source_to_rp_mm:
        return float(e.source_to_rp_mm), "Distance Source to Reference Point as reported"
    text = (e.reference_point_definition or "").lower()
    if "tabletop" in text and d_z > 1e-6 and source_z < table_z:
        # "1cm above Tabletop": where the central ray is 10 mm above the table top
        return (table_z + 10.0 - source_z) / d_z, "1 cm above the table top (report)"
    note = "report" if "isocenter" in text else "IEC 60601-2-43 default"
    return sod - s.rp_from_isocentre_mm, f"15 cm from the isocentre towards the source ({note})"


# Cells tested at once (the events of a chunk together) and events whose reachable cells are
# bounded at once (arrays of events x rows of cells x 5 conditions): memory stays flat in the
# number of events (tracemalloc peak of one 10,371-event study, outputs included: 21 MB).
_BLOCK_CELLS = 1 << 15
_BLOCK_EVENTS = 512
# Slack of the bounding test (mm): it only chooses the cells the exact test then looks at, so it
# must never drop a cell that test keeps; float rounding there is ~1e-10 mm.
_BOUND_SLACK_MM = 1e-3


@dataclass(frozen=True, slots=True)
class _Pose:
    """The phantom's cells turned into one patient position (room frame, before the table offset).

    Cell (i, j) sits at row_points[i] + column_points[j]: the long axis stays along the room's
    y, so x and z depend on the row only and y on the column only, and the normals (one per
    row) have no y component.
    """

    position: str
    rest_mm: float             # centre above the table top
    row_points: np.ndarray     # (n_around, 3): (x, 0, z)
    row_normals: np.ndarray    # (n_around, 3): outward unit normals
    column_points: np.ndarray  # (n_along, 3): (0, y, 0)


@lru_cache(maxsize=256)
def _grid(phantom: Phantom, cell_mm: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """`_surface` once per phantom and cell size (read-only arrays)."""
    arrays = _surface(phantom, cell_mm)
    for x in arrays:
        x.setflags(write=False)
    return arrays


@lru_cache(maxsize=256)
def _pose(phantom: Phantom, cell_mm: float, orientation_modifier: str | None,
          table_relationship: str | None) -> _Pose:
    """The phantom turned into a patient position (`patient_rotation`), once per position.

    The per-cell formulas of the whole grid (patient frame -> room frame by one matrix product
    with the rotation) on every row's first two cells and on the first row's cells: BLAS rounds
    a product of a single row differently from one of several, and the terms a row or column
    does not vary in are exact zeros, so these are the whole grid's values to the last bit.
    """
    theta, along, _ = _grid(phantom, cell_mm)
    a, b = phantom.semi_lateral_mm, phantom.semi_ap_mm
    rotation, position = patient_rotation(orientation_modifier, table_relationship)
    cos_t, sin_t = np.cos(theta)[:, None], np.sin(theta)[:, None]
    first = along[None, :2]
    rows = np.stack(np.broadcast_arrays(a * cos_t, first, b * sin_t), -1) @ rotation.T
    columns = np.stack(np.broadcast_arrays(a * cos_t[:1], along[None, :], b * sin_t[:1]), -1) \
        @ rotation.T
    normal = np.stack(np.broadcast_arrays(cos_t / a, np.zeros((1, first.size)), sin_t / b), -1)
    normal /= np.linalg.norm(normal, axis=-1, keepdims=True)
    normal = normal @ rotation.T
    zero_rows, zero_columns = np.zeros(theta.size), np.zeros(along.size)
    arrays = (np.column_stack([rows[:, 0, 0], zero_rows, rows[:, 0, 2]]),
              np.column_stack([normal[:, 0, 0], zero_rows, normal[:, 0, 2]]),
              np.column_stack([zero_columns, columns[0, :, 1], zero_columns]))
    for x in arrays:   # shared by every study of this phantom and position
        x.setflags(write=False)
    # the rotated ellipse rests on the table top: its lowest point there
    return _Pose(position, math.hypot(rotation[2, 0] * a, rotation[2, 2] * b), *arrays)


def _bsf_cells(kvp: np.ndarray, side_cm: np.ndarray, cu_mm: np.ndarray,
               cu_unknown: np.ndarray) -> np.ndarray:
    """`_bsf` per element (kvp already 80 where unknown), in one interpolation."""
    grid_kvp, grid_cu, grid_side, _ = backscatter_table()
    k = np.clip(kvp, grid_kvp[0], grid_kvp[-1])
    side = np.clip(side_cm, grid_side[0], grid_side[-1])
    cu = np.clip(cu_mm, grid_cu[0], grid_cu[-1])
    if not cu_unknown.any():
        return _interpolator()(np.column_stack([k, cu, side]))
    # unknown copper: the largest B over the tabulated filtrations
    unknown = np.flatnonzero(cu_unknown)
    n_unknown = unknown.size
    xi = [np.column_stack([k, cu, side])]
    xi += [np.column_stack([k[unknown], np.full(n_unknown, c), side[unknown]]) for c in grid_cu]
    values = _interpolator()(np.concatenate(xi))
    out = values[:side.size]
    out[unknown] = np.max(values[side.size:].reshape(grid_cu.size, n_unknown), axis=0)
    return out


def compute_skin_dose(events: list[SkinDoseEvent], *, height_m: float | None = None,
                      weight_kg: float | None = None,
                      settings: SkinDoseSettings = SkinDoseSettings()) -> SkinDoseResult:
    """Skin-dose map and PSD of one study (method in the module docstring).

    Events are taken in blocks: each event's beam is first bounded to the rows and columns of
    cells it can reach, then the cells of a whole block are projected together; cell doses are
    added in event order, so the map is the same as one event at a time over every cell.

    Parameters
    ----------
    events : list of SkinDoseEvent
        Projection irradiation events with a Dose (RP); others are not passed.
    height_m, weight_kg : float or None
        Patient size for the phantom (`phantom_for`).
    settings : SkinDoseSettings

    Returns
    -------
    SkinDoseResult
        `factors` names every factor and its source; `event_factors` gives, per event, the
        factors on its central ray (inverse-square, BSF, f, table transmission).
    """
    s = settings
    ph = phantom_for(height_m, weight_kg, s)
    theta, along, around = _grid(ph, s.cell_mm)
    a, b = ph.semi_lateral_mm, ph.semi_ap_mm
    dose = np.zeros((theta.size, along.size))
    per_event: list[dict] = [{} for _ in events]
    rp_notes: set[str] = set()
    positions: set[str] = set()
    pose_index: dict[tuple, int] = {}
    poses: list[_Pose] = []
    no_geometry: list[int] = []
    geometry: list[int] = []
    scalars: list[tuple] = []
    for i, e in enumerate(events):
        if not e.has_geometry:
            no_geometry.append(i)
            continue
        pose = (e.patient_orientation_modifier, e.patient_table_relationship)
        k = pose_index.get(pose)
        if k is None:   # the phantom turned once per patient position of the study
            k = pose_index[pose] = len(poses)
            poses.append(_pose(ph, s.cell_mm, *pose))
        positions.add(poses[k].position)
        table_z = (e.table_height_mm if e.table_height_mm is not None else -b) + \
            (s.table_height_offset_mm if e.table_height_mm is not None else 0.0)
        d = _direction(e.primary_angle_deg, e.secondary_angle_deg)
        sod = float(e.source_to_isocenter_mm)
        source = (-sod * d[0], -sod * d[1], -sod * d[2])
        d_rp, rp_note = _rp_distance(e, source[2], d[2], table_z, s)
        rp_notes.add(rp_note)
        geometry.append(i)
        scalars.append((k, e.table_lateral_mm or 0.0, e.table_longitudinal_mm or 0.0, table_z,
                        table_z + poses[k].rest_mm, *d, *source, d_rp,
                        float(e.source_to_detector_mm) if e.source_to_detector_mm else sod,
                        math.sqrt(e.field_area_cm2) * 10.0 if e.field_area_cm2 else 100.0,
                        e.dose_rp_mgy, 80.0 if e.kvp is None else e.kvp,
                        0.0 if e.added_cu_mm is None else e.added_cu_mm, e.added_cu_mm is None))
    fallback = _fallback(events, no_geometry, per_event, s)
    for start in range(0, len(geometry), _BLOCK_EVENTS):
        at = geometry[start:start + _BLOCK_EVENTS]
        p = _block_arrays(scalars[start:start + _BLOCK_EVENTS], poses, along, s)
        first = 0
        while first < len(at):   # chunks of at most _BLOCK_CELLS cells (at least one event)
            cum = np.cumsum(p["n_cells"][first:])
            last = first + max(1, int(np.searchsorted(cum, _BLOCK_CELLS, side="right")))
            chunk_factors = _project_chunk(p, first, last, poses, along.size, dose, s)
            for i, f in zip(at[first:last], chunk_factors, strict=True):
                per_event[i] = f
            first = last
    n_geom = len(geometry)
    psd = float(dose.max()) + fallback if dose.size else fallback
    ka_r = float(sum(e.dose_rp_mgy for e in events))
    method = (f"elliptical-cylinder phantom {2 * a:.0f} x {2 * b:.0f} mm ({ph.basis}), "
              f"{s.cell_mm:g} mm cells; patient {'; '.join(sorted(positions)) or 'n/a'}; "
              f"Ka,r x inverse square from the reference point "
              f"({'; '.join(sorted(rp_notes)) or 'none'}) x BSF x f x table transmission, "
              "summed per cell, PSD = maximum (Jones & Pasciak 2011 Part I)")
    if n_geom < len(events):
        method += (f"; {len(events) - n_geom} event(s) without geometry added at the reference-"
                   "point value x BSF x f: upper bound")
    if any(e.added_cu_mm is None for e in events):
        method += "; copper filtration unknown for some events: largest tabulated BSF used"
    factors = {"backscatter": BSF_SOURCE, "f_tissue_air": F_SOURCE,
               "table_transmission": s.table_transmission_source,
               "phantom": f"{ph.basis}; trunk mass fraction {s.trunk_mass_fraction} and length "
                          f"{s.trunk_length_fraction} x height (from memory), width:thickness "
                          f"{s.lateral_to_ap_ratio} (common practice, no source)",
               "reference_point": "IEC 60601-2-43: 15 cm from the isocentre towards the source "
                                  "unless the report defines another (CID 10025; the IEC text "
                                  "from memory)",
               "patient_position": "Patient Orientation Modifier (CID 20) and Patient Table "
                                   "Relationship (CID 21) per event; absent -> supine head-first; "
                                   "positioner angles taken in the equipment frame of a "
                                   "head-first supine patient (an assumption: PS3.3 C.8.7.5 "
                                   "states them relative to the patient)",
               "table_height": "Table Height Position taken as the table-top height relative "
                               "to the isocentre (device-specific in DICOM; an assumption)",
               "field": "Collimated Field Area taken at the detector plane (Distance Source to "
                        "Detector; PS3.16 wording from memory) and scaled linearly with distance; "
                        "a square field of that area"}
    return SkinDoseResult(psd, dose, around.copy(), along.copy(), len(events), n_geom, ka_r,
                          fallback, ph, method, factors, per_event)


def _fallback(events: list[SkinDoseEvent], at: list[int], per_event: list[dict],
              s: SkinDoseSettings) -> float:
    """Events without geometry: reference-point value x BSF x f, summed in event order."""
    if not at:
        return 0.0
    chosen = [events[i] for i in at]
    sides = []
    for e in chosen:
        side = math.sqrt(e.field_area_cm2) if e.field_area_cm2 else 10.0
        if e.field_area_cm2 and e.source_to_isocenter_mm and e.source_to_detector_mm:
            # the field at the reference point, not at the detector
            side *= (e.source_to_isocenter_mm - s.rp_from_isocentre_mm) / e.source_to_detector_mm
        sides.append(side)
    bsfs = _bsf_cells(np.array([80.0 if e.kvp is None else e.kvp for e in chosen], dtype=float),
                      np.array(sides, dtype=float),
                      np.array([0.0 if e.added_cu_mm is None else e.added_cu_mm for e in chosen],
                               dtype=float),
                      np.array([e.added_cu_mm is None for e in chosen]))
    total = 0.0
    for i, e, bsf in zip(at, chosen, bsfs.tolist(), strict=True):
        total += e.dose_rp_mgy * bsf * F_TISSUE_AIR
        per_event[i] = {"has_geometry": False, "bsf": bsf, "f": F_TISSUE_AIR}
    return total


def _block_arrays(scalars: list[tuple], poses: list[_Pose], along: np.ndarray,
                  s: SkinDoseSettings) -> dict[str, np.ndarray]:
    """Per-event arrays of a block of events with geometry, and the cells each can reach."""
    cols = list(zip(*scalars, strict=True))
    p = {"pose": np.array(cols[0], dtype=np.int64)}
    for key, c in zip(("x0", "y0", "table_z", "zc"), cols[1:5], strict=True):
        p[key] = np.array(c, dtype=float)
    d = np.array(cols[5:8], dtype=float).T
    source = np.array(cols[8:11], dtype=float).T
    for key, c in zip(("d_rp", "sid", "side_mm", "dose_rp", "kvp", "cu"), cols[11:17], strict=True):
        p[key] = np.array(c, dtype=float)
    p["cu_unknown"] = np.array(cols[17], dtype=bool)
    # the across axes as the per-event projection had them: u = ref x d / |ref x d|, v = d x u
    # (|u| from a dot product, as np.linalg.norm takes it, so that it rounds the same)
    ref = np.where((np.abs(d[:, 1]) > 0.99)[:, None], [0.0, 0.0, 1.0], [0.0, 1.0, 0.0])
    u = np.cross(ref, d)
    u /= np.sqrt(np.matmul(u[:, None, :], u[:, :, None])[:, 0])
    v = np.cross(d, u)
    p.update(axes=np.stack([d, u, v], axis=-1), source=source,
             offset=np.column_stack([p["x0"], p["y0"], p["zc"]]))
    p["row_points"] = np.concatenate([q.row_points for q in poses])
    p["row_normals"] = np.concatenate([q.row_normals for q in poses])
    p["column_points"] = np.concatenate([q.column_points for q in poses])
    p["j_lo"], p["count"] = _reachable_columns(p, poses, along, s.cell_mm)
    p["n_cells"] = p["count"].sum(axis=1)
    return p


def _reachable_columns(p: dict[str, np.ndarray], poses: list[_Pose], along: np.ndarray,
                       cell_mm: float) -> tuple[np.ndarray, np.ndarray]:
    """Per event and row of cells: the first column and the number of columns that can be in
    the beam and face its source (a superset of the cells the exact test keeps).

    Relative to the source, row i's cells are rel0_i + (0, y, 0) with y the column's room y:
    the beam's depth t and its two across offsets are linear in y, so each inside condition
    (t > 0, |across| <= half side x t) bounds y on one side and a row's cells in the field are
    one run of columns; facing the source does not depend on y. The bounds are widened by
    `_BOUND_SLACK_MM` and a column each side.
    """
    n_around, n_along = poses[0].row_points.shape[0], along.size
    at_rows = p["pose"][:, None] * n_around + np.arange(n_around)
    slack = _BOUND_SLACK_MM
    h = (p["side_mm"] / p["sid"] / 2.0)[:, None]
    with np.errstate(all="ignore"):
        # the rows relative to the source at y = 0 (E, rows, 3), depth and across offsets there
        rel0 = p["row_points"][at_rows] + (p["offset"] - p["source"])[:, None, :]
        tuv0 = np.matmul(rel0, p["axes"])
        t0, u0, v0 = tuv0[..., 0], tuv0[..., 1], tuv0[..., 2]
        t1, u1, v1 = (p["axes"][:, 1, k, None] for k in range(3))        # d/dy of t, u, v
        ok = np.einsum("erk,erk->er", p["row_normals"][at_rows], rel0) < slack   # facing
        # c0 + c1 y <= slack for: t > 0, +-u <= h t, +-v <= h t
        c0 = np.stack([-t0, u0 - h * t0, -u0 - h * t0, v0 - h * t0, -v0 - h * t0])
        c1 = np.stack([-t1, u1 - h * t1, -u1 - h * t1, v1 - h * t1, -v1 - h * t1])
        bound = (slack - c0) / c1
        hi = np.where(c1 > 0, bound, np.inf).min(axis=0)
        lo = np.where(c1 < 0, bound, -np.inf).max(axis=0)
        ok &= ((c1 != 0) | (c0 <= slack)).all(axis=0)
        # room y = +-along of the column: the run of columns, along = cell x (j - half)
        y_sign = np.array([1.0 if q.column_points[-1, 1] > q.column_points[0, 1] else -1.0
                           for q in poses])[p["pose"]][:, None]
        a_lo, a_hi = np.where(y_sign > 0, lo, -hi), np.where(y_sign > 0, hi, -lo)
        half = (n_along - 1) // 2
        j_lo = np.floor(np.clip(a_lo / cell_mm + half, -2.0, n_along + 1.0)) - 1
        j_hi = np.ceil(np.clip(a_hi / cell_mm + half, -2.0, n_along + 1.0)) + 1
        ok &= a_lo <= a_hi
        # an event with a number that is not finite: every cell goes to the exact test
        finite = np.isfinite(np.column_stack([p["offset"], p["source"], p["axes"].reshape(-1, 9),
                                              h])).all(axis=1)
    j_lo = np.clip(j_lo, 0, n_along - 1).astype(np.int64)
    j_hi = np.clip(j_hi, 0, n_along - 1).astype(np.int64)
    ok &= j_lo <= j_hi
    ok[~finite], j_lo[~finite], j_hi[~finite] = True, 0, n_along - 1
    return np.where(ok, j_lo, 0), np.where(ok, j_hi - j_lo + 1, 0)


def _project_chunk(p: dict[str, np.ndarray], first: int, last: int, poses: list[_Pose],
                   n_along: int, dose: np.ndarray, s: SkinDoseSettings) -> list[dict]:
    """Events [first, last) of a block on the cells they can reach; add to `dose`.

    The per-event projection's formulas, elementwise and in its order, so that every cell gets
    the same value to the last bit. Returns each event's factors on its hottest cell.
    """
    ev_rows, rows = np.nonzero(p["count"][first:last])
    ev_rows += first
    n = p["count"][ev_rows, rows]
    total = int(n.sum())
    ev = np.repeat(ev_rows, n)
    column = np.repeat(p["j_lo"][ev_rows, rows], n) + \
        (np.arange(total) - np.repeat(np.cumsum(n) - n, n))
    row = np.repeat(rows, n)
    at_row = p["pose"][ev] * poses[0].row_points.shape[0] + row
    points = p["row_points"][at_row] + p["column_points"][p["pose"][ev] * n_along + column] + \
        p["offset"][ev]
    rel = points - p["source"][ev]
    # t and the across offsets: one matrix product per event, as the per-event projection
    # took them (BLAS rounds a product of a single row on another path: rows are padded to 2)
    counts = p["n_cells"][first:last]
    starts = np.cumsum(counts) - counts
    width = max(2, int(counts.max()))
    if (last - first) * width <= max(2 * total, 4096):
        local, at = ev - first, np.arange(total) - np.repeat(starts, counts)
        padded = np.zeros((last - first, width, 3))
        padded[local, at] = rel
        tuv = np.matmul(padded, p["axes"][first:last])[local, at]
        del padded
    else:   # one event reaches far more cells than the others: one product each
        tuv = np.empty_like(rel)
        for k, lo, n_k in zip(range(first, last), starts.tolist(), counts.tolist(), strict=True):
            if n_k:
                twice = rel[lo:lo + n_k] if n_k > 1 else np.concatenate([rel[lo:lo + 1]] * 2)
                tuv[lo:lo + n_k] = np.matmul(twice, p["axes"][k])[:n_k]
    side_at_t = p["side_mm"][ev] * tuv[:, 0] / p["sid"][ev]
    inside = (tuv[:, 0] > 0) & (np.abs(tuv[:, 1]) <= side_at_t / 2) & \
        (np.abs(tuv[:, 2]) <= side_at_t / 2)
    facing = np.einsum("ij,ij->i", p["row_normals"][at_row], rel) < 0
    hit = np.flatnonzero(inside & facing)
    ev_hit, rel_hit = ev[hit], rel[hit]
    dist = np.sqrt(np.einsum("ij,ij->i", rel_hit, rel_hit))
    through = np.zeros(hit.size, dtype=bool)
    under = np.flatnonzero(p["source"][ev_hit, 2] < p["table_z"][ev_hit])
    if under.size:   # the source below the table top: the rays that cross it within its width
        e_u, r_u = ev_hit[under], rel_hit[under]
        k_u = (p["table_z"][e_u] - p["source"][e_u, 2]) / np.where(r_u[:, 2] > 0, r_u[:, 2], np.inf)
        x_cross = p["source"][e_u, 0] + k_u * r_u[:, 0]
        through[under] = (k_u > 0) & (k_u <= 1) & \
            (np.abs(x_cross - p["x0"][e_u]) <= s.table_half_width_mm)
    trans = np.where(through, s.table_transmission, 1.0)
    bsf = _bsf_cells(p["kvp"][ev_hit], side_at_t[hit] / 10.0, p["cu"][ev_hit],
                     p["cu_unknown"][ev_hit])
    cell_mgy = p["dose_rp"][ev_hit] * (p["d_rp"][ev_hit] / dist) ** 2 * bsf * F_TISSUE_AIR * trans
    # unbuffered, in index order: each cell's sum runs over the events in their order
    np.add.at(dose.reshape(-1), (row * n_along + column)[hit], cell_mgy)
    return _hottest_cells(p, first, last, poses, ev_hit, cell_mgy, dist, bsf, trans)


def _hottest_cells(p: dict[str, np.ndarray], first: int, last: int, poses: list[_Pose],
                   ev_hit: np.ndarray, cell_mgy: np.ndarray, dist: np.ndarray, bsf: np.ndarray,
                   trans: np.ndarray) -> list[dict]:
    """Each event's factors on its hottest cell (the first, in row-major order, of equal ones)."""
    ends = np.searchsorted(ev_hit, np.arange(first, last + 1))
    n_hit = np.diff(ends)
    lit = np.flatnonzero(n_hit)
    starts = ends[:-1][lit]
    if np.isnan(cell_mgy).any():
        hottest = np.array([lo + int(np.argmax(cell_mgy[lo:hi]))
                            for lo, hi in zip(starts, ends[1:][lit], strict=True)], dtype=np.int64)
    else:
        peak = np.maximum.reduceat(cell_mgy, starts) if starts.size else cell_mgy[:0]
        at_peak = np.flatnonzero(cell_mgy == np.repeat(peak, n_hit[lit]))
        hottest = at_peak[np.searchsorted(at_peak, starts)]
    factors: list[dict] = [{"has_geometry": True, "hit": False} for _ in range(last - first)]
    columns = zip(lit.tolist(), p["d_rp"][first:last][lit].tolist(), dist[hottest].tolist(),
                  bsf[hottest].tolist(), trans[hottest].tolist(),
                  p["pose"][first:last][lit].tolist(), strict=True)
    for k, d_rp, d_skin, b, t, pose in columns:
        factors[k] = {"has_geometry": True, "hit": True, "inverse_square": (d_rp / d_skin) ** 2,
                      "bsf": b, "f": F_TISSUE_AIR, "table_transmission": t, "d_rp_mm": d_rp,
                      "d_skin_mm": d_skin, "position": poses[pose].position}
    return factors
