"""Fitting layer: global scan, inner least squares, the reported fit, the automatic model
choice. lmfit appears only in ``models.py`` and ``lmfit_view.py``, for the Python API."""
