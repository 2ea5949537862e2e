"""Compiled kernels: ahead-of-time compile command, disk cache folder, cold-cache notice."""

import os
import subprocess
import sys
from pathlib import Path

from rootvar.addin.cli.main import main
from rootvar.core import compile_kernels, kernels_cached, runtime


def test_compile_command_leaves_every_kernel_ready(capsys):
    assert main(["compile"]) == 0
    assert "ready in" in capsys.readouterr().out
    assert kernels_cached()
    assert compile_kernels() >= 0.0


def test_cache_goes_to_a_per_user_folder_when_the_package_cannot_be_written(monkeypatch, tmp_path):
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    monkeypatch.setenv("LOCALAPPDATA", str(tmp_path))
    package = tmp_path / "pkg"
    package.write_text("a file where the package folder would be")  # nothing can be made in it
    choice = runtime.cache_choice(package)
    assert choice == runtime.CacheChoice(tmp_path / "rootvar" / "numba", True, "")


def test_cache_stays_beside_the_sources_when_writable_or_goes_where_the_user_chose(
    monkeypatch, tmp_path
):
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    assert runtime.cache_choice(tmp_path) == runtime.CacheChoice(None, True, "")
    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path / "mine"))
    assert runtime.cache_choice(tmp_path).folder == tmp_path / "mine"


def test_an_unusable_numba_cache_dir_is_passed_over_with_a_notice(monkeypatch, tmp_path):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    monkeypatch.setenv("NUMBA_CACHE_DIR", str(blocker))
    choice = runtime.cache_choice(tmp_path)
    assert choice.folder is None and choice.caching
    assert f"NUMBA_CACHE_DIR={blocker} cannot be written" in choice.notice


def test_with_nothing_writable_the_cache_goes_to_a_private_temp_folder_or_is_off(
    monkeypatch, tmp_path
):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(blocker / "cache"))
    temp = tmp_path / "tmp"
    temp.mkdir()
    monkeypatch.setattr(runtime.tempfile, "gettempdir", lambda: str(temp))
    choice = runtime.cache_choice(blocker / "pkg")
    assert choice.caching and choice.folder.parent == temp
    assert choice.folder.stat().st_mode & 0o777 == 0o700 and "temporary folder" in choice.notice
    # A folder of that name that others may write is never used: code loaded from it would run.
    choice.folder.chmod(0o777)
    off = runtime.cache_choice(blocker / "pkg")
    assert off == runtime.CacheChoice(None, False, off.notice) and "compiles them" in off.notice


def test_kernels_decorated_where_nothing_can_be_cached_still_run(monkeypatch):
    monkeypatch.setattr(runtime, "CACHING", False)
    twice = runtime.njit(cache=True)(lambda x: 2.0 * x)
    assert twice(1.5) == 3.0  # compiled without a cache instead of failing at import


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


def test_every_kernel_a_first_calibration_compiles_is_cached_for_the_next_process(tmp_path):
    # The gradient kernels once looked uncached to every new process: the notice checked a
    # kernel the calibration never calls.  Each engine now names the kernels it calls.
    env = {**os.environ, "NUMBA_CACHE_DIR": str(tmp_path)}
    code = (
        "import os, warnings, numpy as np, pandas as pd, rootvar.core as c\n"
        "from rootvar.core import warmup as compiled\n"
        "warnings.simplefilter('always')\n"
        "p = c.HestonParams(0.04, 1.5, 0.04, 0.5, -0.7)\n"
        "k, t = np.linspace(80.0, 120.0, 4).repeat(2), np.tile([0.5, 1.0], 4)\n"
        "q = pd.DataFrame({'maturity': t, 'strike': k,\n"
        "                  'implied_vol': c.heston_implied_vol(p, 100.0, k, t)})\n"
        "c.calibrate(q, 100.0, starts=0)\n"
        "used = [k for k in compiled.KERNELS if k.signatures]\n"
        "print('used', len(used))\n"
        "index = [k._cache._cache_file._index_path for k in used]\n"
        "print('unsaved', [k.__name__ for k, i in zip(used, index) if not os.path.exists(i)])\n"
        "print('misses', sum(sum(k.stats.cache_misses.values()) for k in used))\n"
    )
    runs = [
        subprocess.run(
            [sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=600
        )
        for _ in range(2)
    ]
    for run in runs:
        assert run.returncode == 0, run.stderr
        assert "unsaved []" in run.stdout
    cold, warm = runs
    assert "CompileNotice" in cold.stderr and "misses 0" not in cold.stdout
    assert "CompileNotice" not in warm.stderr and "misses 0" in warm.stdout
