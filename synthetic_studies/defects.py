"""Deliberate defects: which studies get one, and how a dataset is spoilt. Pure.

Content defects change a dose object in place (the file is still DICOM); file defects are
extra files beside the clean ones (a truncated copy, an exact copy under another name,
a text file, a Basic Text SR). Every defect is listed in the manifest.
"""

from __future__ import annotations

from collections.abc import Callable

from pydicom.dataset import Dataset
from pydicom.sr.coding import Code

from pipeline import concepts as C

from .specs import StudySpec

__all__ = [
    "CONTENT_DEFECTS",
    "FILE_DEFECTS",
    "apply_content_defect",
    "find_num",
    "is_eligible",
]

CONTENT_DEFECTS = ("missing_unit", "zero_dap", "implausible_value")
FILE_DEFECTS = ("truncated", "duplicate_copy", "not_dose_sr", "not_dicom")


def is_eligible(defect: str, spec: StudySpec) -> bool:
    """Whether `spec` can carry `defect` (it needs an RDSR, and the right kind of event)."""
    has_rdsr = any(r.kind == "rdsr" for r in spec.reports)
    if defect == "zero_dap":
        return has_rdsr and spec.modality == "DX" and spec.story is None
    if defect == "implausible_value":
        return has_rdsr and spec.modality == "CT" and spec.story is None
    if defect == "missing_unit":
        return has_rdsr and spec.modality in ("CT", "DX") and spec.story is None \
            and len(spec.reports) == 1
    if defect in ("truncated", "duplicate_copy"):
        return has_rdsr and spec.story is None
    return True


def find_num(ds: Dataset, concept: Code) -> Dataset | None:
    """First NUM content item named `concept`, depth first (a helper for spoiling files)."""
    for item in ds.get("ContentSequence", []):
        name = item.ConceptNameCodeSequence[0]
        if item.ValueType == "NUM" and \
                Code(name.CodeValue, name.CodingSchemeDesignator, name.CodeMeaning) == concept:
            return item
        found = find_num(item, concept)
        if found is not None:
            return found
    return None


def _missing_unit(ds: Dataset) -> None:
    item = find_num(ds, C.MEAN_CTDIVOL) or find_num(ds, C.DOSE_AREA_PRODUCT)
    del item.MeasuredValueSequence[0].MeasurementUnitsCodeSequence


def _zero_dap(ds: Dataset) -> None:
    find_num(ds, C.DOSE_AREA_PRODUCT).MeasuredValueSequence[0].NumericValue = "0"


def _implausible(ds: Dataset) -> None:
    find_num(ds, C.DLP).MeasuredValueSequence[0].NumericValue = "1000000"


_APPLY: dict[str, Callable[[Dataset], None]] = {
    "missing_unit": _missing_unit,
    "zero_dap": _zero_dap,
    "implausible_value": _implausible,
}


def apply_content_defect(ds: Dataset, defect: str) -> None:
    """Spoil `ds` in place with one of CONTENT_DEFECTS."""
    _APPLY[defect](ds)
