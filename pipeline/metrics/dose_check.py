"""Accumulated CTDIvol of a CT examination by table position (NEMA XR 25 dose check).

NEMA XR 25 (Computed Tomography Dose Check) and the AAPM's 2011 recommendations for its
notification and alert values define the *alert* on the CTDIvol accumulated at a position:
for each table position z, the sum of the CTDIvol of the acquisitions whose scanning range
covers z; the examination's value is the maximum over z. Scans of different body parts do
not add up; repeated scans of the same range do.

Ranges come from TID 10014 (Top / Bottom Z Location of Scanning Length, DCM 113897 / 113898,
mm, in one Frame of Reference). When any acquisition lacks them, the only safe figure is the
plain sum over acquisitions, which is an *upper bound* of the positional maximum and is
labelled so.
"""

from __future__ import annotations

from collections.abc import Iterable

__all__ = ["METHOD_BY_POSITION", "METHOD_UPPER_BOUND", "accumulated_ctdivol_by_position"]

METHOD_BY_POSITION = ("maximum over table position z of the summed CTDIvol of the acquisitions "
                      "covering z (NEMA XR 25; scanning ranges from TID 10014)")
METHOD_UPPER_BOUND = ("sum of CTDIvol over all acquisitions: an UPPER BOUND of the accumulated "
                      "CTDIvol at any position, because scanning-range positions were not reported")


def accumulated_ctdivol_by_position(
        acquisitions: Iterable[tuple[float, float | None, float | None]]) -> tuple[float, str]:
    """Maximum over z of the summed CTDIvol of acquisitions covering z, and the method used.

    Parameters
    ----------
    acquisitions : iterable of (ctdivol_mgy, z_a_mm, z_b_mm)
        One tuple per acquisition (localizers excluded by the caller); the two z values are the
        ends of its scanning range in any order, or None when not reported.

    Returns
    -------
    tuple of (float, str)
        The accumulated CTDIvol in mGy and `METHOD_BY_POSITION`, or, when any acquisition has
        no range, the plain sum and `METHOD_UPPER_BOUND`.

    Notes
    -----
    Ranges are half-open [low, high): two ranges that only touch (one ends where the next
    begins) do not overlap. A range of zero length (a stationary acquisition reported at one
    position) covers that position. The maximum of a sum of interval indicators is reached at
    some interval's lower end, so only those points are evaluated.
    """
    rows = [(float(c), a, b) for c, a, b in acquisitions]
    if not rows:
        return 0.0, METHOD_BY_POSITION
    if any(a is None or b is None for _, a, b in rows):
        return sum(c for c, _, _ in rows), METHOD_UPPER_BOUND
    spans = [(c, min(a, b), max(a, b)) for c, a, b in rows]

    def covers(low: float, high: float, z: float) -> bool:
        return low <= z < high or low == high == z

    best = max(sum(c for c, low, high in spans if covers(low, high, z)) for _, z, _ in spans)
    return best, METHOD_BY_POSITION
