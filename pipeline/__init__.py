"""Kerma Ledger: patient radiation dose audit from DICOM dose reports."""

__version__ = "0.1.0"

__all__ = ["__version__"]
