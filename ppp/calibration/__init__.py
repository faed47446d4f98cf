"""Accuracy against experiment: reference sets, band matching, evaluation, least-squares calibration of
parameter sets with cross-validation, and per-class band uncertainties."""
