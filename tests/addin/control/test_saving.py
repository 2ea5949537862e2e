"""Never lose a day: the workbook lock, the identity check, file rights, clean failures."""

import os
import pwd
import stat
import subprocess
import sys
import tempfile
import textwrap
from pathlib import Path

import pytest
from support.control_books import _digest, _rows, _without_run_time, make_book

import rootvar.addin.control as control
from rootvar.addin.cli.main import main
from rootvar.addin.control.saving import BookLock, current_umask
from rootvar.addin.control.store import HistoryStore

CLI = [sys.executable, "-m", "rootvar.addin.cli.main"]


def _refresh_process(path, as_of, *extra):
    return subprocess.Popen(
        [*CLI, "refresh", str(path), "--as-of", as_of, "--workers", "1", "--quiet", *extra],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )


@pytest.mark.slow
def test_two_concurrent_refreshes_lose_no_day(tmp_path):
    for trial in range(3):
        folder = tmp_path / f"trial{trial}"
        folder.mkdir()
        path = make_book(folder, models=2)
        first = _refresh_process(path, "2026-12-01")
        second = _refresh_process(path, "2026-12-02")
        codes = [p.wait(timeout=300) for p in (first, second)]
        errors = [p.stderr.read() for p in (first, second)]
        assert all(c in (0, 1) for c in codes), errors
        store = HistoryStore(str(folder / "control.history.sqlite"))
        assert store.dates() == ["2026-12-01", "2026-12-02"]
        assert len(store.read()) == 2 * 4
        window = _rows(path, "History")
        assert sorted({r[0] for r in window}) == ["2026-12-01", "2026-12-02"]
        assert len(window) == 8


def test_a_second_run_waits_then_exits_2_naming_the_holder(tmp_path, capsys):
    path = make_book(tmp_path, models=1)
    before = _digest(path)
    with BookLock(path, wait=1):
        code = main(["refresh", str(path), "--workers", "1", "--quiet", "--wait", "0.2"])
    assert code == control.EXIT_FILE
    err = capsys.readouterr().err
    assert "another refresh holds it" in err and f"process {os.getpid()}" in err
    assert "started 20" in err and "waited 0.2 s" in err
    assert len(err.strip().splitlines()) == 1
    assert _digest(path) == before


_CRASH_HOLDING_THE_LOCK = textwrap.dedent(
    """
    import os, signal, sys
    from pathlib import Path
    from rootvar.addin.control.saving import BookLock

    lock = BookLock(Path(sys.argv[1]), wait=5)
    lock.__enter__()
    os.kill(os.getpid(), signal.SIGKILL)  # a crash: no release, the details file stays
    """
)


def test_a_stale_lock_from_a_crashed_run_is_taken_over(tmp_path, capsys):
    path = make_book(tmp_path, models=1)
    done = subprocess.run([sys.executable, "-c", _CRASH_HOLDING_THE_LOCK, str(path)], timeout=60)
    assert done.returncode == -9
    assert (tmp_path / ".control.xlsx.rootvar-lock.json").exists()
    code = main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--wait", "5"])
    assert code in (0, 1)
    err = capsys.readouterr().err
    assert "took over the lock left by a run that ended without releasing it" in err
    assert not (tmp_path / ".control.xlsx.rootvar-lock.json").exists()
    assert len(_rows(path)) == 2


def test_a_workbook_changed_meanwhile_is_not_overwritten(tmp_path, monkeypatch, capsys):
    path = make_book(tmp_path, models=1)
    from rootvar.addin.control import daily_refresh as refresh_module

    real = refresh_module.run_checks

    def checks_while_someone_saves(*args, **kwargs):
        out = real(*args, **kwargs)
        with open(path, "ab") as fh:  # a colleague's program saves the book meanwhile
            fh.write(b"\0")
        return out

    monkeypatch.setattr(refresh_module, "run_checks", checks_while_someone_saves)
    main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    err = capsys.readouterr().err
    assert "wrote control.refreshed.xlsx instead of control.xlsx" in err
    assert "changed by something else" in err
    changed = _digest(path)
    assert len(_rows(tmp_path / "control.refreshed.xlsx")) == 2
    assert _digest(path) == changed  # the colleague's file stays as they saved it


@pytest.mark.parametrize("mode", [0o644, 0o664, 0o600])
def test_the_replaced_workbook_keeps_its_mode_and_the_backup_follows_umask(tmp_path, mode):
    path = make_book(tmp_path, models=1)
    os.chmod(path, mode)
    old = os.umask(0o022)
    try:
        main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    finally:
        os.umask(old)
    assert stat.S_IMODE(path.stat().st_mode) == mode
    backup = stat.S_IMODE((tmp_path / "control.bak.xlsx").stat().st_mode)
    assert backup == (0o644 & mode)  # umask 022, never more open than the workbook


def test_the_replaced_workbook_keeps_its_group(tmp_path):
    path = make_book(tmp_path, models=1)
    groups = [g for g in os.getgroups() if g != path.stat().st_gid]
    if os.geteuid() != 0 and not groups:
        pytest.skip("this user belongs to one group only")
    group = groups[0] if groups else 65534
    os.chown(path, -1, group)
    main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    assert path.stat().st_gid == group


@pytest.mark.parametrize("mask, expected", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_new_files_follow_the_umask(tmp_path, mask, expected):
    path = make_book(tmp_path, models=1)
    out = tmp_path / "new.xlsx"
    old = os.umask(mask)
    try:
        assert current_umask() == mask
        main(["refresh", str(path), "--out", str(out), "--workers", "1", "--quiet"])
    finally:
        os.umask(old)
    assert stat.S_IMODE(out.stat().st_mode) == expected


def _as_nobody(argv):
    """Run the command line in a forked child as the unprivileged user ``nobody``.

    Returns (exit code, standard error).  The child is forked from this
    interpreter, so nothing needs to be importable by that user.
    """
    import rootvar.addin.control.history_export  # noqa: F401  (imported before the fork)

    user = pwd.getpwnam("nobody")
    read_end, write_end = os.pipe()
    pid = os.fork()
    if pid == 0:  # child
        code = 99
        try:
            os.close(read_end)
            os.dup2(write_end, 2)
            os.setgroups([])
            os.setgid(user.pw_gid)
            os.setuid(user.pw_uid)
            sys.stderr = os.fdopen(2, "w", closefd=False)
            code = main(argv)
            sys.stderr.flush()
        finally:
            os._exit(code)
    os.close(write_end)
    with os.fdopen(read_end) as fh:
        err = fh.read()
    _, status = os.waitpid(pid, 0)
    return os.waitstatus_to_exitcode(status), err


@pytest.fixture
def open_folder():
    """A folder every user may enter (pytest's tmp_path is private to its owner)."""
    folder = Path(tempfile.mkdtemp(prefix="rootvar-rights-"))
    folder.chmod(0o755)
    yield folder
    for p in sorted(folder.rglob("*"), reverse=True):
        p.chmod(0o700)
    import shutil

    shutil.rmtree(folder)


needs_root = pytest.mark.skipif(os.geteuid() != 0, reason="switching user needs root")


@needs_root
@pytest.mark.parametrize("command", ["refresh", "history"])
def test_a_folder_the_user_may_not_enter(open_folder, command):
    private = open_folder / "private"
    private.mkdir(mode=0o700)
    path = make_book(private, models=1)
    before = _digest(path)
    code, err = _as_nobody([command, str(path)])
    assert code == 2, err
    assert "permission denied" in err and str(path) in err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert _digest(path) == before


@needs_root
@pytest.mark.parametrize("command", ["refresh", "history"])
def test_a_file_the_user_may_not_read(open_folder, command):
    path = make_book(open_folder, models=1)
    path.chmod(0o600)
    before = _digest(path)
    code, err = _as_nobody([command, str(path)])
    assert code == 2, err
    assert "permission denied" in err and str(path) in err
    assert "not a workbook" not in err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert _digest(path) == before


@pytest.mark.parametrize("kind", ["missing", "folder", "missing folder"])
def test_missing_file_folder_and_directory_are_one_line_exit_2(tmp_path, capsys, kind):
    target = {
        "missing": tmp_path / "nope.xlsx",
        "folder": tmp_path,
        "missing folder": tmp_path / "no" / "c.xlsx",
    }[kind]
    assert main(["refresh", str(target), "--quiet"]) == control.EXIT_FILE
    err = capsys.readouterr().err
    assert str(target) in err and len(err.strip().splitlines()) == 1
    assert {"missing": "no such file", "folder": "is a folder", "missing folder": "does not exist"}[
        kind
    ] in err


def test_a_crash_never_exits_0_or_1(tmp_path, monkeypatch, capsys):
    path = make_book(tmp_path, models=1)
    from rootvar.addin.control import daily_refresh as refresh_module

    def crash(*args, **kwargs):
        raise ZeroDivisionError("a bug")

    monkeypatch.setattr(refresh_module, "run_checks", crash)
    before = _digest(path)
    assert main(["refresh", str(path), "--quiet"]) == 4
    assert "internal error" in capsys.readouterr().err
    assert _digest(path) == before


def test_an_interrupted_run_writes_nothing(tmp_path, monkeypatch, capsys):
    path = make_book(tmp_path, models=1)
    from rootvar.addin.control import daily_refresh as refresh_module

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(refresh_module, "run_checks", interrupted)
    before = _digest(path)
    assert main(["refresh", str(path), "--quiet"]) == 130
    assert "interrupted; nothing was written" in capsys.readouterr().err
    assert _digest(path) == before
    store = tmp_path / "control.history.sqlite"
    assert not store.exists() or HistoryStore(str(store)).dates() == []


@pytest.mark.parametrize("value", ["0", "-2", "two"])
def test_workers_below_one_is_an_input_error(tmp_path, capsys, value):
    path = make_book(tmp_path, models=1)
    with pytest.raises(SystemExit) as stop:
        main(["refresh", str(path), "--workers", value])
    assert stop.value.code == 2
    assert ">= 1" in capsys.readouterr().err


@pytest.mark.slow
def test_a_local_cluster_of_two_worker_processes_gives_the_rows_of_one_worker(tmp_path):
    from dask.distributed import Client, LocalCluster

    one = make_book(tmp_path, name="one.xlsx")
    main(["refresh", str(one), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    with (
        LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
        ) as cluster,
        Client(cluster) as client,
    ):
        assert len(client.scheduler_info()["workers"]) == 2
        pids = set(client.run(os.getpid).values())
        assert len(pids) == 2 and os.getpid() not in pids  # separate processes
        two = make_book(tmp_path, name="two.xlsx")
        outcome = control.refresh(two, "2026-12-01", scheduler=cluster.scheduler_address)
    assert outcome.exit_code in (0, 1)
    assert _without_run_time(_rows(two)) == _without_run_time(_rows(one))


def _start_and_wait_for_progress(path):
    """A refresh on 2 workers in its own session, returned once a model is done."""
    import time

    proc = subprocess.Popen(
        [*CLI, "refresh", str(path), "--as-of", "2026-12-03", "--workers", "2"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,  # its own process group, like a terminal job
    )
    deadline = time.monotonic() + 120
    line = ""
    while "[1/" not in line and time.monotonic() < deadline:
        line = proc.stderr.readline()
    assert "[1/" in line, "no progress line"
    return proc


@pytest.mark.slow
@pytest.mark.parametrize("how", ["ctrl-c", "kill"])
def test_an_interrupted_or_killed_refresh_leaves_workbook_and_store_as_they_were(tmp_path, how):
    import signal

    def slower(wb):  # enough work left after the first model that the signal finds it running
        for row in wb["Settings"].iter_rows(min_row=4, max_row=12):
            if row[0].value == "paths":
                row[1].value = 400_000
        for r in range(3, wb["Models"].max_row + 1):  # under load the first result can come late
            wb["Models"].cell(row=r, column=11, value="0.5, 1, 1.5")

    path = make_book(tmp_path, edit=slower, models=5)
    main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    before = _digest(path)
    proc = _start_and_wait_for_progress(path)
    if how == "ctrl-c":
        os.killpg(proc.pid, signal.SIGINT)  # what a terminal sends to the whole job
    else:
        proc.kill()
    code = proc.wait(timeout=120)
    # the workers die with the parent, so the pipe they share closes
    err = proc.stderr.read()
    if how == "ctrl-c":
        assert code == 130 and "Traceback" not in err, err
        assert "nothing was written" in err
    else:
        assert code == -9
    assert _digest(path) == before
    assert HistoryStore(str(tmp_path / "control.history.sqlite")).dates() == ["2026-12-01"]


def test_progress_shows_models_done_rate_and_time_left():
    import io

    from rootvar.addin.control.checks import Progress
    from rootvar.core import HestonParams
    from rootvar.core.checks.daily import ModelSpec

    out = io.StringIO()
    spec = ModelSpec("M", "u", 100.0, 0.0, 0.0, HestonParams(0.04, 1, 0.04, 0.2, -0.5), (1,), (1,))
    progress = Progress(4, out, quiet=False, every=0.0)
    progress.started -= 10.0  # as if 10 s had passed
    progress.step(spec, "")
    line = out.getvalue().strip()
    assert line.startswith("[1/4]  25.0%")
    assert "0.10 models/s" in line and "left 0m30s" in line
