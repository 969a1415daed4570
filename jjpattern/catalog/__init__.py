"""History across cooldowns: an SQLite catalog of result documents, drift flags, comparisons.

``open_catalog(path)`` gives a :class:`Catalog`; ``record_result(path, result)``
records one result. A batch records from one writer in the main process.
"""

from .paths import catalog_for_reading, catalog_for_recording, default_catalog_path
from .schema import SCHEMA_VERSION
from .store import Catalog, Recorded, RecordRow, open_catalog, record_result

__all__ = ["Catalog", "Recorded", "RecordRow", "SCHEMA_VERSION", "catalog_for_reading",
           "catalog_for_recording", "default_catalog_path", "open_catalog", "record_result"]
