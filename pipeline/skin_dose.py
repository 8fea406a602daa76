"""Peak skin dose (PSD) of a fluoroscopically guided procedure from its irradiation events. Pure.

Method (after Jones AK, Pasciak AS. Calculating the peak skin dose resulting from
fluoroscopically guided interventions. Part I: Methods. J Appl Clin Med Phys 2011;12(4):3670):
the patient is an elliptical cylinder lying supine on the table, head towards +y; each event's
beam is projected from its source position (positioner angles and Distance Source to
Isocenter, PS3.16 TID 10003C) onto the cells of the phantom's surface that face the source,
and each cell inside the collimated field receives

    D = Ka,r x (d_RP / d_cell)^2 x BSF(kVp, field side) x f_tissue/air x T_table (if through it)

where Ka,r is the event's Dose (RP) and d_RP the source-to-reference-point distance (IEC
60601-2-43 interventional reference point, 15 cm from the isocentre towards the source, unless
the report defines another). Cell doses add over events; the PSD is the largest cell.

Room frame (mm): origin at the isocentre, x towards the patient's left, y towards the head, z up.
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

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["BSF_FIELD_SIDES_CM", "BSF_KVP", "BSF_TABLE", "F_TISSUE_AIR", "REFERENCE_ADULT",
           "SkinDoseEvent", "SkinDoseResult", "SkinDoseSettings", "Phantom", "backscatter_factor",
           "beam_direction", "compute_skin_dose", "phantom_for", "UNCERTAINTY_NOTE"]

# Backscatter factor (ratio of air kerma at the surface with and without the patient) for ICRU
# tissue, by tube voltage (interventional beam, about 0.1-0.3 mm Cu added filtration) and by
# side of a square field at the skin. Values from memory, rounded to two decimals, of the shape
# of the tables Jones & Pasciak 2011 (Part I) draw on (Petoussi-Henss N et al., Phys Med Biol
# 1998;43:2237-2250, ICRU tissue): BSF rises with field size and beam quality, 1.2-1.6
# (ICRP Publication 117 gives that range). Not read in the publication: marked from memory.
BSF_KVP = (60.0, 80.0, 100.0, 120.0)
BSF_FIELD_SIDES_CM = (10.0, 20.0, 30.0)
BSF_TABLE = ((1.28, 1.33, 1.34),
             (1.34, 1.41, 1.43),
             (1.37, 1.46, 1.48),
             (1.38, 1.48, 1.50))
BSF_SOURCE = ("backscatter factor, ICRU tissue, by kVp and field side at the skin: values from "
              "memory of Petoussi-Henss et al. 1998 as used by Jones & Pasciak 2011 Part I; "
              "bilinear interpolation, clamped at the table edges")
# Ratio of mass energy-absorption coefficients, soft tissue to air, over the effective energies
# of interventional beams (about 40-60 keV): 1.06 (from memory of Hubbell & Seltzer, NISTIR
# 5632 tables; Jones & Pasciak 2011 use a value of this size).
F_TISSUE_AIR = 1.06
F_SOURCE = ("(mu_en/rho) tissue/air = 1.06 (from memory: Hubbell & Seltzer NISTIR 5632, "
            "40-60 keV; Jones & Pasciak 2011 Part I)")
# ICRP Publication 89 reference adult male, 1.76 m and 73 kg (from memory).
REFERENCE_ADULT = (1.76, 73.0)
UNCERTAINTY_NOTE = ("an estimate: typically within about +-40 % (Jones & Pasciak 2011, from "
                    "memory), more where the phantom, table height convention or field size "
                    "differ from the patient's; clinical follow-up by the responsible physician")


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


def backscatter_factor(kvp: float | None, field_side_cm: float) -> float:
    """BSF by bilinear interpolation in `BSF_TABLE` (clamped; kVp unknown -> 80 kV).

    Parameters
    ----------
    kvp : float or None
        Tube voltage of the event.
    field_side_cm : float
        Side of the (square) field at the skin.

    Returns
    -------
    float
    """
    return float(_bsf(kvp, np.asarray(field_side_cm, dtype=float)))


def _bsf(kvp: float | None, side_cm: np.ndarray) -> np.ndarray:
    """Vectorised over field sides: interpolate the kVp rows, then along the side."""
    k = 80.0 if kvp is None else float(kvp)
    table = np.asarray(BSF_TABLE)
    row = [np.interp(k, BSF_KVP, table[:, c]) for c in range(table.shape[1])]
    return np.interp(side_cm, BSF_FIELD_SIDES_CM, row)   # np.interp clamps at the ends


def beam_direction(primary_deg: float, secondary_deg: float) -> np.ndarray:
    """Unit vector from the isocentre to the detector (PS3.3 C.8.7.5 signs), room frame."""
    a, b = math.radians(primary_deg), math.radians(secondary_deg)
    return np.array([math.sin(a) * math.cos(b), math.sin(b), math.cos(a) * math.cos(b)])


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


def _rp_distance(e: SkinDoseEvent, source: np.ndarray, d: np.ndarray, table_z: float,
                 s: SkinDoseSettings) -> tuple[float, str]:
    sod = float(e.source_to_isocenter_mm)
    if e.source_to_rp_mm:
        return float(e.source_to_rp_mm), "Distance Source to Reference Point as reported"
    text = (e.reference_point_definition or "").lower()
    if "tabletop" in text and d[2] > 1e-6 and source[2] < table_z:
        # "1cm above Tabletop": where the central ray is 10 mm above the table top
        return (table_z + 10.0 - source[2]) / d[2], "1 cm above the table top (report)"
    note = "report" if "isocenter" in text else "IEC 60601-2-43 default"
    return sod - s.rp_from_isocentre_mm, f"15 cm from the isocentre towards the source ({note})"


def compute_skin_dose(events: list[SkinDoseEvent], *, height_m: float | None = None,
                      weight_kg: float | None = None,
                      settings: SkinDoseSettings = SkinDoseSettings()) -> SkinDoseResult:
    """Skin-dose map and PSD of one study (method in the module docstring).

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
    theta, along, around = _surface(ph, s.cell_mm)
    a, b = ph.semi_lateral_mm, ph.semi_ap_mm
    cos_t, sin_t = np.cos(theta)[:, None], np.sin(theta)[:, None]
    normal = np.stack(np.broadcast_arrays(cos_t / a, np.zeros((1, along.size)), sin_t / b), -1)
    normal /= np.linalg.norm(normal, axis=-1, keepdims=True)
    dose = np.zeros((theta.size, along.size))
    fallback = 0.0
    per_event: list[dict] = []
    rp_notes: set[str] = set()
    n_geom = 0
    for e in events:
        if not e.has_geometry:
            side = math.sqrt(e.field_area_cm2) if e.field_area_cm2 else 10.0
            if e.field_area_cm2 and e.source_to_isocenter_mm and e.source_to_detector_mm:
                # the field at the reference point, not at the detector
                side *= (e.source_to_isocenter_mm - s.rp_from_isocentre_mm) / e.source_to_detector_mm
            bsf = backscatter_factor(e.kvp, side)
            fallback += e.dose_rp_mgy * bsf * F_TISSUE_AIR
            per_event.append({"has_geometry": False, "bsf": bsf, "f": F_TISSUE_AIR})
            continue
        n_geom += 1
        table_z = (e.table_height_mm if e.table_height_mm is not None else -b) + \
            (s.table_height_offset_mm if e.table_height_mm is not None else 0.0)
        x0 = e.table_lateral_mm or 0.0
        y0 = e.table_longitudinal_mm or 0.0
        points = np.stack(np.broadcast_arrays(x0 + a * cos_t, y0 + along[None, :],
                                              table_z + b + b * sin_t), -1)
        d = beam_direction(e.primary_angle_deg, e.secondary_angle_deg)
        sod = float(e.source_to_isocenter_mm)
        source = -sod * d
        d_rp, rp_note = _rp_distance(e, source, d, table_z, s)
        rp_notes.add(rp_note)
        sid = float(e.source_to_detector_mm) if e.source_to_detector_mm else sod
        ref = np.array([0.0, 0.0, 1.0]) if abs(d[1]) > 0.99 else np.array([0.0, 1.0, 0.0])
        u = np.cross(ref, d)
        u /= np.linalg.norm(u)
        v = np.cross(d, u)
        rel = points - source
        t = rel @ d
        dist = np.linalg.norm(rel, axis=-1)
        side_at_t = (math.sqrt(e.field_area_cm2) * 10.0 if e.field_area_cm2 else 100.0) * t / sid
        inside = (t > 0) & (np.abs(rel @ u) <= side_at_t / 2) & (np.abs(rel @ v) <= side_at_t / 2)
        facing = np.einsum("ijk,ijk->ij", normal, rel) < 0
        hit = inside & facing
        if not hit.any():
            per_event.append({"has_geometry": True, "hit": False})
            continue
        through = np.zeros_like(hit)
        if source[2] < table_z:
            k = (table_z - source[2]) / np.where(rel[..., 2] > 0, rel[..., 2], np.inf)
            x_cross = source[0] + k * rel[..., 0]
            through = (k > 0) & (k <= 1) & (np.abs(x_cross - x0) <= s.table_half_width_mm)
        trans = np.where(through, s.table_transmission, 1.0)
        bsf = _bsf(e.kvp, np.where(hit, side_at_t, 100.0) / 10.0)
        cell = e.dose_rp_mgy * (d_rp / dist) ** 2 * bsf * F_TISSUE_AIR * trans
        dose += np.where(hit, cell, 0.0)
        i, j = np.unravel_index(np.argmax(np.where(hit, cell, -1.0)), hit.shape)
        per_event.append({"has_geometry": True, "hit": True,
                          "inverse_square": float((d_rp / dist[i, j]) ** 2),
                          "bsf": float(bsf[i, j]), "f": F_TISSUE_AIR,
                          "table_transmission": float(trans[i, j]),
                          "d_rp_mm": d_rp, "d_skin_mm": float(dist[i, j])})
    psd = float(dose.max()) + fallback if dose.size else fallback
    ka_r = float(sum(e.dose_rp_mgy for e in events))
    method = (f"elliptical-cylinder phantom {2 * a:.0f} x {2 * b:.0f} mm ({ph.basis}), "
              f"{s.cell_mm:g} mm cells; Ka,r x inverse square from the reference point "
              f"({'; '.join(sorted(rp_notes)) or 'none'}) x BSF x f x table transmission, "
              "summed per cell, PSD = maximum (Jones & Pasciak 2011 Part I)")
    if n_geom < len(events):
        method += (f"; {len(events) - n_geom} event(s) without geometry added at the reference-"
                   "point value x BSF x f: upper bound")
    factors = {"backscatter": BSF_SOURCE, "f_tissue_air": F_SOURCE,
               "table_transmission": s.table_transmission_source,
               "phantom": f"{ph.basis}; trunk mass fraction {s.trunk_mass_fraction} and length "
                          f"{s.trunk_length_fraction} x height (from memory), width:thickness "
                          f"{s.lateral_to_ap_ratio} (common practice, no source)",
               "reference_point": "IEC 60601-2-43: 15 cm from the isocentre towards the source "
                                  "unless the report defines another",
               "table_height": "Table Height Position taken as the table-top height relative "
                               "to the isocentre (device-specific in DICOM; an assumption)",
               "field": "Collimated Field Area taken at the detector plane (Distance Source to "
                        "Detector; PS3.16 wording from memory) and scaled linearly with distance; "
                        "a square field of that area"}
    return SkinDoseResult(psd, dose, around, along, len(events), n_geom, ka_r, fallback, ph,
                          method, factors, per_event)
