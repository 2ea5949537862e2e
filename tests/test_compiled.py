"""Compiled kernels: ahead-of-time compile command, disk cache folder, cold-cache notice."""

import os
import subprocess
import sys
from pathlib import Path

from rootvar.addin.cli import main
from rootvar.core import compile_kernels, kernels_cached, numba_setup


def test_compile_command_leaves_every_kernel_ready(capsys):
    assert main(["compile"]) == 0
    assert "ready in" in capsys.readouterr().out
    assert kernels_cached()
    assert compile_kernels() >= 0.0


def test_cache_goes_to_a_per_user_folder_when_the_package_is_read_only(monkeypatch, tmp_path):
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    monkeypatch.setenv("LOCALAPPDATA", str(tmp_path))
    monkeypatch.setattr(os, "access", lambda path, mode: False)
    assert numba_setup.cache_folder(tmp_path / "pkg") == tmp_path / "rootvar" / "numba"


def test_cache_stays_beside_the_sources_when_writable_or_when_the_user_chose(monkeypatch, tmp_path):
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    assert numba_setup.cache_folder(tmp_path) is None  # writable
    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path / "mine"))
    monkeypatch.setattr(os, "access", lambda path, mode: False)
    assert numba_setup.cache_folder(tmp_path) is None  # numba reads the user's choice itself


def test_a_fresh_process_with_an_empty_cache_says_it_compiles_then_reuses_the_cache(tmp_path):
    # A cold compile takes tens of seconds on a shared 2-core machine; this is
    # the one test that pays it, in a child process with its own cache folder.
    env = {**os.environ, "NUMBA_CACHE_DIR": str(tmp_path)}
    code = (
        "import warnings, rootvar.core as c\n"
        "warnings.simplefilter('always')\n"
        "print('cached before', c.kernels_cached())\n"
        "c.heston_price(c.HestonParams(0.04, 1.5, 0.04, 0.5, -0.7), 100.0, 100.0, 1.0)\n"
        "c.compile_kernels()\n"
        "print('cached after', c.kernels_cached())\n"
    )
    cold = subprocess.run(
        [sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=600
    )
    assert cold.returncode == 0, cold.stderr
    assert "cached before False" in cold.stdout and "cached after True" in cold.stdout
    assert "CompileNotice" in cold.stderr and "rootvar compile" in cold.stderr
    assert any(Path(tmp_path).rglob("*.nbi"))  # numba's index files landed in the folder
    warm = subprocess.run(
        [sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=600
    )
    assert "cached before True" in warm.stdout and "CompileNotice" not in warm.stderr
