"""Service accounts (issue 19): every command, as a fresh process, where almost nothing is writable.

A matrix of scenarios x commands.  Each command runs as its own process
through the ``rootvar`` console script, because numba's cache folder is
chosen once, at import (:mod:`rootvar.core.runtime`).

Scenarios (under root the child drops to an unprivileged user in Python,
``subprocess`` with ``user=``; the package folder /work/main is root-owned,
so it is read-only to that user):

a  ``nobody``, HOME=/nonexistent: kernels go to the private temporary folder;
b  ``nobody``, XDG_CACHE_HOME a missing folder under a read-only parent (HOME
   writable, so a wrong fall-back to ~/.cache would show): temporary folder;
c  ``nobody``, NUMBA_CACHE_DIR pointing at a file, HOME writable: refused
   with a notice, kernels go to ~/.cache/rootvar/numba;
d  nothing writable at all: HOME and TMPDIR read-only.  Python's tempfile
   then falls back to /tmp, which every user may write, so the folder that
   rootvar.core.runtime would take there, /tmp/rootvar-numba-<uid>, is occupied by a
   root-owned folder (refused: another user's).  The child runs under a free
   user id picked for the session, so no real user's /tmp folder is touched;
   kernels run uncached, compiled again in every process.

Commands: report, refresh, history, compute and calibrate on tiny inputs
(one control model, a three-formula workbook, an eight-quote surface); all
of them run in every scenario, d included.  Scenario a also runs the clean
failures (read-only folders, files the user may not read).  The scenarios
run two at a time (each compiles the kernels once, about 30-40 s of one
core); the commands of a scenario run in order and share its TMPDIR.

Not root: the commands run as the current user with HOME and TMPDIR in
folders made 0o555; scenarios that need the package folder read-only (or
the temporary folder name free) skip, saying why.  Under root (CI) none skips.
"""

from __future__ import annotations

import hashlib
import json
import os
import pwd
import random
import shutil
import stat
import subprocess
import sys
import sysconfig
import tempfile
import time
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from openpyxl import Workbook, load_workbook
from openpyxl.worksheet.formula import ArrayFormula
from support.control_books import make_book
from support.paths import REPO

ROOTVAR = Path(sys.executable).parent / "rootvar"
SHIPPED = REPO / "workbooks" / "parameter_check.xlsx"
PACKAGE_CACHE = REPO / "core" / "__pycache__"
ROOT = os.geteuid() == 0
AS_OF = "2026-12-01"
MODEL = "SVC-ONE"

SCENARIOS = ("a", "b", "c", "d")
COMMANDS = ("report", "refresh", "history", "compute", "calibrate")
#: What the inputs imply: the model breaches (Feller 0.04, Euler at 1/8 year), the
#: workbook holds one cell with a bad parameter, the rest succeed.
EXPECTED = {"report": 0, "refresh": 1, "history": 0, "compute": 3, "calibrate": 0}
#: Commands that call compiled kernels (so must say where they are kept).
KERNEL_COMMANDS = ("refresh", "compute", "calibrate")

#: Failures that must be clean, run in scenario a: (name, expected text in the line).
FAILURES = {
    "compute-without-out-beside-a-read-only-workbook": "cannot be written",
    "refresh-in-place-of-a-read-only-workbook": "nothing was written",
    "history-out-in-a-read-only-folder": "permission denied",
    "calibrate-out-in-a-read-only-folder": "--out must be a writable file",
    "compute-a-workbook-the-user-may-not-read": "permission denied",
    "calibrate-quotes-the-user-may-not-read": "permission denied",
}

CACHE_NOTICE_MARKS = ("compiled kernels", "NUMBA_CACHE_DIR=")
COMPILE_NOTICE_MARK = "compiling the numerical kernels"


# ---------------------------------------------------------------- accounts and folders


@dataclass(frozen=True)
class Account:
    """Who a scenario's processes run as (under root: dropped to; else: this user)."""

    uid: int
    gid: int

    def popen_args(self) -> dict:
        if not ROOT:
            return {}
        return {"user": self.uid, "group": self.gid, "extra_groups": []}


def _nobody() -> Account:
    entry = pwd.getpwnam("nobody")
    return Account(entry.pw_uid, entry.pw_gid)


def _owned_by(path: Path, account: Account, mode: int) -> Path:
    path.mkdir(parents=True, exist_ok=True)
    if ROOT:
        os.chown(path, account.uid, account.gid)
    path.chmod(mode)
    return path


def _may_traverse(info: os.stat_result, account: Account) -> bool:
    if info.st_uid == account.uid:
        return bool(info.st_mode & stat.S_IXUSR)
    if info.st_gid == account.gid:
        return bool(info.st_mode & stat.S_IXGRP)
    return bool(info.st_mode & stat.S_IXOTH)


def _interpreter_paths() -> list[Path]:
    """Everything the child's interpreter must reach: executable, stdlib, venv, sources."""
    stdlib = sysconfig.get_path("stdlib")
    found = [
        os.path.realpath(sys.executable),
        sys.base_prefix,
        sys.prefix,
        stdlib,
        sysconfig.get_path("platstdlib"),
        os.path.join(stdlib, "lib-dynload"),
        sysconfig.get_path("purelib"),
        sysconfig.get_path("platlib"),
        REPO,
        ROOTVAR,
    ]
    return [Path(p) for p in found if p]


@pytest.fixture(scope="session")
def traversable():
    """Under root: let the unprivileged users traverse (o+x, never o+r) the interpreter's path.

    The venv's python is a link into /root/.pyenv, and /root is usually 0o700.
    Each folder changed is recorded with its exact mode and given it back at
    teardown.
    """
    changed: list[tuple[Path, int]] = []
    try:
        if ROOT:
            users = [_nobody(), Account(_FREE_UID, _nobody().gid)]
            seen = set()
            for target in _interpreter_paths():
                chain = [*reversed(target.parents), *([target] if target.is_dir() else [])]
                for folder in chain:
                    if folder in seen:
                        continue
                    seen.add(folder)
                    info = folder.stat()
                    if not all(_may_traverse(info, user) for user in users):
                        mode = stat.S_IMODE(info.st_mode)
                        changed.append((folder, mode))
                        folder.chmod(mode | stat.S_IXOTH)
        yield changed
    finally:
        for folder, mode in reversed(changed):
            folder.chmod(mode)


def _pick_free_uid() -> int:
    """A user id with no account, for scenario d (see the module docstring)."""
    taken = {entry.pw_uid for entry in pwd.getpwall()}
    rng = random.Random()
    while True:
        uid = rng.randrange(200_000, 2_000_000_000)
        if uid not in taken and not (Path("/tmp") / f"rootvar-numba-{uid}").exists():
            return uid


_FREE_UID = _pick_free_uid() if ROOT else os.getuid()


# ---------------------------------------------------------------- inputs


def _edit_model(wb) -> None:
    """One model that breaches for sure: Feller ratio 0.04, Euler at an eighth of a year."""
    ws = wb["Models"]
    values = [MODEL, "service check", 100, 0.02, 0.01, 0.04, 0.5, 0.04, 1.0, -0.9]
    for col, value in enumerate(values, start=1):
        ws.cell(row=2, column=col, value=value)


def _tiny_workbook(path: Path) -> None:
    """Feller, a Fourier price, a small Monte Carlo table, and one cell with a bad kappa."""
    wb = Workbook()
    ws = wb.active
    good = [("v0", 0.04), ("kappa", 1.5), ("theta", 0.04), ("vol_of_vol", 0.5), ("rho", -0.7)]
    for row, (name, value) in enumerate(good, start=1):
        ws[f"A{row}"], ws[f"B{row}"] = name, value
        ws[f"G{row}"] = -1.0 if name == "kappa" else value
    ws["D1"] = "=ROOTVAR_FELLER(B1:B5)"
    ws["D2"] = "=ROOTVAR_FOURIER_PRICE(B1:B5,100,100,1)"
    ws["D3"] = ArrayFormula("D3:E10", "=ROOTVAR_MC_PRICE(B1:B5,100,100,1,0,0,,,8,2000)")
    ws["D12"] = "=ROOTVAR_FELLER(G1:G5)"
    wb.save(path)


def _quotes(path: Path) -> None:
    """Eight quotes from rootvar.core.heston_implied_vol (two maturities, four strikes)."""
    from rootvar.core import HestonParams, heston_implied_vol

    p = HestonParams(0.035, 1.2, 0.05, 0.6, -0.7)
    t = np.array([0.25, 1.0])[:, None]
    k = 100 * np.exp(np.linspace(-1, 1, 4)[None, :] * np.sqrt(0.05 * t))
    vol = heston_implied_vol(p, 100.0, k, t, 0.0, 0.0)
    pd.DataFrame(
        {
            "maturity": np.broadcast_to(t, k.shape).ravel(),
            "strike": k.ravel().round(2),
            "implied_vol": vol.ravel().round(5),
        }
    ).to_csv(path, index=False)


def _digest(path: Path):
    try:
        return hashlib.sha256(path.read_bytes()).hexdigest()
    except PermissionError:  # not root: a file made unreadable to this very user
        info = path.stat()
        return ("unreadable", info.st_size, info.st_mtime_ns)


# ---------------------------------------------------------------- one scenario


@dataclass
class Run:
    argv: list
    code: int
    out: str
    err: str
    seconds: float
    changed: list  # inputs whose content changed
    appeared: list  # files that appeared in read-only input folders

    def notices(self) -> list[str]:
        return [line for line in self.err.splitlines() if _is_notice(line)]

    def other_lines(self) -> list[str]:
        return [line for line in self.err.splitlines() if line.strip() and not _is_notice(line)]

    def cache_notices(self) -> list[str]:
        return [n for n in self.notices() if COMPILE_NOTICE_MARK not in n]

    def describe(self) -> str:
        return (
            f"rootvar {' '.join(map(str, self.argv))}\nexit {self.code} after "
            f"{self.seconds:.1f} s\n--- stdout\n{self.out[-2000:]}\n--- stderr\n{self.err}"
        )


def _is_notice(line: str) -> bool:
    return line.startswith("rootvar: ") and any(
        mark in line for mark in (*CACHE_NOTICE_MARKS, COMPILE_NOTICE_MARK)
    )


@dataclass
class Scenario:
    name: str
    account: Account
    root: Path
    env: dict
    inputs: Path
    out: Path
    home: Path | None = None
    tmp: Path | None = None
    numba_file: Path | None = None
    occupied: Path | None = None
    runs: dict = field(default_factory=dict)
    seconds: float = 0.0

    def watched(self) -> list[Path]:
        files = sorted(p for p in self.inputs.iterdir() if p.is_file())
        return files + ([SHIPPED] if self.name == "a" else [])

    def listing(self) -> dict:
        folders = [self.inputs] + ([SHIPPED.parent] if self.name == "a" else [])
        return {f: sorted(p.name for p in f.iterdir()) for f in folders}


def _make_scenario(name: str, base: Path, locked: Path) -> Scenario:
    account = Account(_FREE_UID, _nobody().gid) if name == "d" and ROOT else _account()
    root = base / name
    root.mkdir(mode=0o755)
    inputs = root / "inputs"
    inputs.mkdir(mode=0o755)
    make_book(inputs, edit=_edit_model, models=1)
    _tiny_workbook(inputs / "tiny.xlsx")
    _quotes(inputs / "quotes.csv")
    if name == "a":
        shutil.copyfile(inputs / "tiny.xlsx", inputs / "secret.xlsx")
        shutil.copyfile(inputs / "quotes.csv", inputs / "secret.csv")
    if name == "c":
        (inputs / "not-a-folder").write_text("NUMBA_CACHE_DIR points here, at a file\n")
    for p in inputs.iterdir():
        p.chmod(0o644)
    for secret in inputs.glob("secret.*"):
        secret.chmod(0o600 if ROOT else 0o000)
    if not ROOT:
        inputs.chmod(0o555)
    out = _owned_by(root / "out", account, 0o755)
    env = {"PATH": "/usr/bin:/bin"}
    sc = Scenario(name, account, root, env, inputs, out)
    if name in ("a", "b", "c"):
        sc.tmp = _owned_by(root / "tmp", account, 0o700)
        env["TMPDIR"] = str(sc.tmp)
    if name == "a":
        env["HOME"] = "/nonexistent"
    if name in ("b", "c"):
        sc.home = _owned_by(root / "home", account, 0o755)
        env["HOME"] = str(sc.home)
    if name == "b":
        env["XDG_CACHE_HOME"] = str(locked / "missing" / "cache")
    if name == "c":
        sc.numba_file = inputs / "not-a-folder"
        env["NUMBA_CACHE_DIR"] = str(sc.numba_file)
    if name == "d":
        env["HOME"] = env["TMPDIR"] = str(locked)
        sc.occupied = Path("/tmp") / f"rootvar-numba-{account.uid}"
        sc.occupied.mkdir()  # exclusive: never takes over an existing folder
        # root-owned (another user's) under root; open to others when not root: both refused
        sc.occupied.chmod(0o755 if ROOT else 0o777)
    return sc


def _account() -> Account:
    return _nobody() if ROOT else Account(os.getuid(), os.getgid())


def _argv(sc: Scenario, case: str) -> list:
    i, o = sc.inputs, sc.out
    refresh = ["--workers", "1", "--as-of", AS_OF, "--quiet"]
    quotes = ["--spot", "100", "--starts", "0"]
    read_only = SHIPPED if ROOT or not os.access(SHIPPED.parent, os.W_OK) else i / "tiny.xlsx"
    table = {
        "report": "report --v0 0.04 --kappa 1.5 --theta 0.04 --sigma 0.5 --rho -0.7".split(),
        "refresh": [
            "refresh",
            i / "control.xlsx",
            "--out",
            o / "control.xlsx",
            "--history",
            o / "history.sqlite",
            *refresh,
        ],
        "history": ["history", o / "history.sqlite", "--out", o / "history.xlsx"],
        "compute": ["compute", i / "tiny.xlsx", "--out", o / "tiny.xlsx"],
        "calibrate": ["calibrate", i / "quotes.csv", *quotes, "--out", o / "fit.json"],
        "compute-without-out-beside-a-read-only-workbook": ["compute", read_only],
        "refresh-in-place-of-a-read-only-workbook": ["refresh", i / "control.xlsx", *refresh],
        "history-out-in-a-read-only-folder": [
            "history",
            o / "history.sqlite",
            "--out",
            i / "history.csv",
        ],
        "calibrate-out-in-a-read-only-folder": [
            "calibrate",
            i / "quotes.csv",
            *quotes,
            "--out",
            i / "fit.json",
        ],
        "compute-a-workbook-the-user-may-not-read": [
            "compute",
            i / "secret.xlsx",
            "--out",
            o / "secret.xlsx",
        ],
        "calibrate-quotes-the-user-may-not-read": ["calibrate", i / "secret.csv", *quotes],
    }
    return [str(a) for a in table[case]]


def _run_scenario(sc: Scenario, cwd: Path) -> Scenario:
    start = time.perf_counter()
    cases = list(COMMANDS) + (list(FAILURES) if sc.name == "a" else [])
    before = {p: _digest(p) for p in sc.watched()}
    listing = sc.listing()
    for case in cases:
        argv = _argv(sc, case)
        t0 = time.perf_counter()
        done = subprocess.run(
            [str(ROOTVAR), *argv],
            cwd=cwd,
            env=sc.env,
            capture_output=True,
            text=True,
            timeout=600,
            check=False,
            **sc.account.popen_args(),
        )
        now = sc.listing()
        sc.runs[case] = Run(
            argv,
            done.returncode,
            done.stdout,
            done.stderr,
            time.perf_counter() - t0,
            [p.name for p, h in before.items() if _digest(p) != h],
            [n for f in now for n in now[f] if n not in listing[f]],
        )
    sc.seconds = time.perf_counter() - start
    return sc


def _impossible(name: str) -> str | None:
    """Why a scenario cannot run as this (non-root) user, or None."""
    if ROOT:
        return None
    folder = PACKAGE_CACHE if PACKAGE_CACHE.exists() else REPO / "core"
    package_writable = os.access(folder, os.W_OK)
    if name in ("a", "b", "d") and package_writable:
        return (
            "the package folder is writable by this user, so the kernels are cached beside "
            "the sources and this scenario's fall-back cannot be reached (CI runs it as root)"
        )
    if name == "d" and (Path("/tmp") / f"rootvar-numba-{os.getuid()}").exists():
        return "this user's /tmp/rootvar-numba-<uid> exists; the test does not take it over"
    return None


@pytest.fixture(scope="session")
def matrix(traversable):
    """Runs every scenario (two at a time) on first use; maps scenario -> Future[Scenario]."""
    # under root in /tmp itself: root's own temporary folder may be closed to other users
    base = Path(tempfile.mkdtemp(prefix="rootvar-service-", dir="/tmp" if ROOT else None))
    base.chmod(0o755)  # the child users may enter, not write
    locked = base / "locked"
    locked.mkdir()
    locked.chmod(0o555)
    futures: dict[str, Future | str] = {}
    pool = ThreadPoolExecutor(max_workers=2)
    scenarios = []
    try:
        for name in ("d", "a", "b", "c"):  # the longest first
            reason = _impossible(name)
            if reason:
                futures[name] = reason
                continue
            sc = _make_scenario(name, base, locked)
            scenarios.append(sc)
            futures[name] = pool.submit(_run_scenario, sc, locked)
        yield futures
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
        for sc in scenarios:
            if sc.occupied is not None:
                shutil.rmtree(sc.occupied, ignore_errors=True)
        for folder in [base, *base.rglob("*")]:
            if folder.is_dir() and not folder.is_symlink():
                folder.chmod(0o755)
        shutil.rmtree(base, ignore_errors=True)


def _scenario(matrix, name: str) -> Scenario:
    entry = matrix[name]
    if isinstance(entry, str):
        pytest.skip(entry)
    return entry.result()


MATRIX = [pytest.param(s, c, id=f"{s}-{c}") for s in SCENARIOS for c in COMMANDS]


# ---------------------------------------------------------------- the matrix


def _check_work(sc: Scenario, command: str, run: Run) -> None:
    o = sc.out
    if command == "report":
        assert "Feller ratio 0.4800" in run.out
    elif command == "refresh":
        results = load_workbook(o / "control.xlsx", read_only=True)["Results"]
        table = results.iter_rows(min_row=2, values_only=True)
        rows = [r for r in table if len(r) > 5 and r[3] == MODEL]
        assert len(rows) == 2  # one maturity, two strikes
        assert {r[5] for r in rows} == {"breach"}
        assert (o / "history.sqlite").stat().st_size > 0
    elif command == "history":
        assert "2 rows written to" in run.out
        assert "Trend" in load_workbook(o / "history.xlsx", read_only=True).sheetnames
    elif command == "compute":
        assert "4 formulas computed" in run.out  # an array formula counts once
        cells = load_workbook(o / "tiny.xlsx", data_only=True).active
        assert cells["D1"].value == pytest.approx(2 * 1.5 * 0.04 / 0.5**2)
        assert 0 < cells["E3"].value < 100  # the Monte Carlo price
        assert "kappa" in cells["D12"].value and "1 cells hold error texts" in run.out
    elif command == "calibrate":
        fit = json.loads((o / "fit.json").read_text())
        assert {"v0", "kappa", "theta", "vol_of_vol", "rho", "status"} <= set(fit)
        assert "RMSE (bp)" in run.out


@pytest.mark.parametrize("scenario, command", MATRIX)
def test_command_does_its_work_and_exits_as_its_input_implies(matrix, scenario, command):
    sc = _scenario(matrix, scenario)
    run = sc.runs[command]
    assert run.code == EXPECTED[command], run.describe()
    _check_work(sc, command, run)


@pytest.mark.parametrize("scenario, command", MATRIX)
def test_command_stderr_holds_only_one_line_notices_and_never_a_traceback(
    matrix, scenario, command
):
    run = _scenario(matrix, scenario).runs[command]
    assert "Traceback" not in run.err, run.describe()
    assert run.other_lines() == [], run.describe()
    assert len(run.cache_notices()) <= 1, run.describe()  # one per process at most


@pytest.mark.parametrize("scenario, command", MATRIX)
def test_command_leaves_the_users_input_files_unchanged(matrix, scenario, command):
    run = _scenario(matrix, scenario).runs[command]
    assert run.changed == [], run.describe()
    assert run.appeared == [], run.describe()


def _cache_files(folder: Path) -> list[Path]:
    return list(folder.rglob("*.nbi")) if folder.is_dir() else []


@pytest.mark.parametrize("scenario", SCENARIOS)
def test_kernels_are_kept_in_the_first_writable_folder_and_each_process_says_where(
    matrix, scenario
):
    sc = _scenario(matrix, scenario)
    uid = sc.account.uid
    package_writable = not ROOT and os.access(PACKAGE_CACHE, os.W_OK)
    expected = {
        "a": f"kept in the temporary folder {sc.tmp}/rootvar-numba-{uid} because neither the "
        "package folder nor /nonexistent/.cache/rootvar/numba can be written",
        "b": f"kept in the temporary folder {sc.tmp}/rootvar-numba-{uid} because neither the "
        f"package folder nor {sc.env.get('XDG_CACHE_HOME')}/rootvar/numba can be written",
        "c": f"NUMBA_CACHE_DIR={sc.numba_file} cannot be written, so it is not used",
        "d": "no folder can be written for compiled kernels",
    }[scenario]
    for command in COMMANDS:
        run = sc.runs[command]
        notices = run.cache_notices()
        if command in KERNEL_COMMANDS:
            assert len(notices) == 1 and expected in notices[0], run.describe()
        assert all(expected in n for n in notices), run.describe()
    if scenario in ("a", "b"):
        private = sc.tmp / f"rootvar-numba-{uid}"
        assert _cache_files(private), "no kernel was cached in the private temporary folder"
        info = private.stat()
        assert info.st_uid == uid and stat.S_IMODE(info.st_mode) == 0o700
    if scenario == "b":  # XDG_CACHE_HOME is honoured: no fall-back into ~/.cache
        assert not (sc.home / ".cache").exists()
    if scenario == "c" and not package_writable:
        assert _cache_files(sc.home / ".cache" / "rootvar" / "numba")
        assert sc.numba_file.read_text().startswith("NUMBA_CACHE_DIR points here")
    if scenario == "d":
        assert list(sc.occupied.iterdir()) == []
        assert _cache_files(sc.root) == []


# ---------------------------------------------------------------- clean failures


@pytest.mark.parametrize("case", list(FAILURES))
def test_a_file_problem_is_exit_2_with_one_line_and_nothing_written(matrix, case):
    sc = _scenario(matrix, "a")
    run = sc.runs[case]
    assert run.code == 2, run.describe()
    assert "Traceback" not in run.err, run.describe()
    lines = run.other_lines()
    assert len(lines) == 1 and FAILURES[case] in lines[0].lower(), run.describe()
    assert run.changed == [] and run.appeared == [], run.describe()
    assert not (sc.out / "secret.xlsx").exists()


# ---------------------------------------------------------------- no temporary folder at all


def test_no_usable_temporary_folder_leaves_kernels_uncached_instead_of_failing(
    monkeypatch, tmp_path
):
    """``tempfile.gettempdir`` raises when no candidate folder can be written; the import must not.

    Cannot be staged for a child process (/tmp is writable by every user), so
    the choice is asked in process, with every other folder made impossible
    (a path under a file cannot be created, even by root).
    """
    from rootvar.core import runtime as numba_setup

    blocker = tmp_path / "a-file"
    blocker.write_text("")
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(blocker / "cache"))

    def no_temporary_folder():
        raise FileNotFoundError(2, "No usable temporary directory found")

    monkeypatch.setattr(numba_setup.tempfile, "gettempdir", no_temporary_folder)
    choice = numba_setup.cache_choice(package=blocker)
    assert choice.folder is None and not choice.caching
    assert "no folder can be written for compiled kernels" in choice.notice
