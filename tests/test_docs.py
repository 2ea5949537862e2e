"""The documentation covers the code and builds without a warning."""

import re
from pathlib import Path

import pytest

DOCS = Path(__file__).resolve().parents[1] / "docs"


def test_every_public_core_name_is_in_the_reference():
    import rootvar.core as core

    text = "\n".join(p.read_text(encoding="utf-8") for p in (DOCS / "reference").glob("*.rst"))
    documented = set(re.findall(r"::\s+rootvar\.core\.(\w+)", text))
    for line in re.findall(r"^\.\. core-constants::(.*)$", text, flags=re.M):
        documented |= set(line.split())
    public = {n for n in core.__all__ if not n.startswith("_")}
    assert public - documented == set(), "add them to docs/reference/core.rst"
    assert documented - public == set()


def test_docs_build_without_warnings(tmp_path):
    sphinx = pytest.importorskip("sphinx.cmd.build")
    rc = sphinx.build_main(["-W", "--keep-going", "-q", "-b", "html", str(DOCS), str(tmp_path)])
    assert rc == 0
