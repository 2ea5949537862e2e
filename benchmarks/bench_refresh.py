"""Daily refresh of a 50-model book (2 maturities x 5 strikes): wall time on 1 and 2 workers."""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

from openpyxl import load_workbook

from rootvar.addin.control import refresh
from rootvar.addin.workbook_build import build_control


def _book(folder: Path) -> Path:
    """The shipped template with its five models repeated to 50 (benchmark data only)."""
    path = folder / "book.xlsx"
    build_control(path)
    wb = load_workbook(path)
    ws = wb["Models"]
    base = [[c.value for c in row] for row in ws.iter_rows(min_row=2, max_row=6)]
    for i in range(5, 50):
        row = list(base[i % 5])
        row[0] = f"{row[0]}-{i:02d}"
        row[5] = row[5] * (1 + 0.01 * (i // 5))  # v0 nudged so rows differ
        ws.append(row)
    wb.save(path)
    return path


def run() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        book = _book(Path(tmp))
        times = {}
        for workers in (1, 2):
            start = time.perf_counter()
            outcome = refresh(book, "2026-12-01", workers=workers)
            times[workers] = time.perf_counter() - start
            print(
                f"  {workers} worker(s): {times[workers]:6.1f} s  "
                f"({len(outcome.rows)} result rows, exit code {outcome.exit_code})"
            )
        print(f"  speed-up with 2 workers: {times[1] / times[2]:.2f}x (target: 50 models in 60 s)")
