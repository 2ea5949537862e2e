"""The daily control refresh, as a small package.

- :mod:`.book` reads and validates the control workbook (file, settings, models);
- :mod:`.checks` runs the models' checks (in process, process pool or Dask);
- :mod:`.results` builds the result rows and writes the *Results* and *History* sheets;
- :mod:`.store` is the history store (SQLite or PostgreSQL through SQLAlchemy Core);
- :mod:`.sheet_import` imports an old *History* sheet into the store once;
- :mod:`.saving` holds the workbook lock (the atomic save is :mod:`rootvar.addin.files`);
- :mod:`.daily_refresh` runs a refresh in that order;
- :mod:`.history_export` shows or exports the store (``rootvar history``).
"""

from .book import MAX_UNPACKED, MODEL_COLUMNS, OPTIONAL_SETTINGS, SETTING_LABELS, ControlError
from .daily_refresh import EXIT_BREACH, EXIT_CLEAR, EXIT_FILE, EXIT_ROWS, RefreshOutcome, refresh
from .results import RESULT_COLUMNS, summary_table
from .saving import LockBusy
from .store import HistoryStore, StoreError

__all__ = [
    "EXIT_BREACH",
    "EXIT_CLEAR",
    "EXIT_FILE",
    "EXIT_ROWS",
    "MAX_UNPACKED",
    "MODEL_COLUMNS",
    "OPTIONAL_SETTINGS",
    "RESULT_COLUMNS",
    "SETTING_LABELS",
    "ControlError",
    "HistoryStore",
    "LockBusy",
    "RefreshOutcome",
    "StoreError",
    "refresh",
    "summary_table",
]
