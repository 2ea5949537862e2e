"""Where the repository is, for tests that read its shipped files (README, workbooks, docs)."""

from pathlib import Path

#: The repository's top folder (the one holding pyproject.toml).
REPO = Path(__file__).resolve().parents[2]
