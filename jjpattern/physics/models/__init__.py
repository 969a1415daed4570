"""Closed-form pattern models, one file each, found by name through the registry.

Adding a model: write ``physics/models/<name>.py`` defining ``MODEL =
PatternModelSpec(...)`` (see ``rectangular.py``) and add its module name to
``registry._MODULES``. Nothing here imports numpy until a formula is called.
"""

from .check import check_model
from .registry import all_references, get_model, model_names, registered
from .spec import BASE_PARAMETERS, ExtraParameter, PatternModelSpec

__all__ = ["BASE_PARAMETERS", "ExtraParameter", "PatternModelSpec", "all_references",
           "check_model", "get_model", "model_names", "registered"]
