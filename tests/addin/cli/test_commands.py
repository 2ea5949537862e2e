"""The rootvar command line."""

from rootvar.addin.cli.main import main


def test_report_prints_feller_and_caution(capsys):
    rc = main(
        [
            "report",
            "--v0",
            "0.04",
            "--kappa",
            "0.5",
            "--theta",
            "0.04",
            "--vol-of-vol",
            "1.0",
            "--rho",
            "-0.9",
            "--horizons",
            "1,5",
        ]
    )
    out = capsys.readouterr().out
    assert rc == 0
    assert "Feller ratio 0.0400 (severe breach)" in out
    assert "independent model validation" in out


def test_report_bad_parameter_exits_2_with_message(capsys):
    rc = main(
        [
            "report",
            "--v0",
            "0.04",
            "--kappa",
            "-1",
            "--theta",
            "0.04",
            "--vol-of-vol",
            "1.0",
            "--rho",
            "-0.9",
        ]
    )
    assert rc == 2
    assert "kappa must be > 0, got -1.0" in capsys.readouterr().err


def test_demo_runs_over_the_invented_desk(capsys):
    assert main(["demo"]) == 0
    out = capsys.readouterr().out
    assert "Harbourline" in out and "TMS-BIO" in out


def test_compute_and_refresh_exit_codes(tmp_path, capsys):
    from rootvar.addin.workbooks.build import build_all

    trader, _, _ = build_all(tmp_path)
    assert main(["compute", str(trader), "--out", str(tmp_path / "t.xlsx")]) == 0
    assert main(["compute", str(tmp_path / "missing.xlsx")]) == 2
    bad = tmp_path / "cycle.xlsx"
    from openpyxl import Workbook

    wb = Workbook()
    wb.active["A1"], wb.active["B1"] = "=B1", "=A1"
    wb.save(bad)
    assert main(["compute", str(bad)]) == 2
    assert "reference cycle" in capsys.readouterr().err


def test_refresh_help_lists_the_exit_codes(capsys):
    import pytest

    with pytest.raises(SystemExit):
        main(["refresh", "--help"])
    text = capsys.readouterr().out
    for line in (
        "0  all clear",
        "1  breaches",
        "2  input, file, lock or store error",
        "3  some rows failed",
        "4  unexpected internal error",
        "130  interrupted",
    ):
        assert line in text


# ----------------------------------------------------------------- clean failures and options

import hashlib  # noqa: E402
import os  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402

import pytest  # noqa: E402


def _one_line_exit_2(capsys, argv, fragment):
    assert main(argv) == 2
    captured = capsys.readouterr()
    err = captured.err.strip()
    assert len(err.splitlines()) == 1, err
    assert "Traceback" not in err and fragment in err
    return err


def test_compute_on_a_non_workbook_is_one_line_exit_2_and_the_file_unchanged(tmp_path, capsys):
    junk = tmp_path / "notes.xlsx"
    junk.write_text("not a spreadsheet")
    before = hashlib.sha256(junk.read_bytes()).hexdigest()
    _one_line_exit_2(capsys, ["compute", str(junk)], "notes.xlsx: not a workbook")
    assert hashlib.sha256(junk.read_bytes()).hexdigest() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.xlsx"]


def test_compute_on_a_damaged_zip_is_one_line_exit_2(tmp_path, capsys):
    import zipfile

    bad = tmp_path / "damaged.xlsx"
    with zipfile.ZipFile(bad, "w") as z:
        z.writestr("hello.txt", "no workbook parts")
    _one_line_exit_2(capsys, ["compute", str(bad)], "cannot be read as a workbook")


def test_compute_on_a_missing_file_or_folder_is_one_line_exit_2(tmp_path, capsys):
    _one_line_exit_2(capsys, ["compute", str(tmp_path / "nope.xlsx")], "no such file")
    _one_line_exit_2(capsys, ["compute", str(tmp_path)], "is a folder")
    from rootvar.addin.workbooks.build import build_all

    trader = build_all(tmp_path / "books")[0]
    before = hashlib.sha256(trader.read_bytes()).hexdigest()
    out = tmp_path / "no-such-folder" / "x.xlsx"
    _one_line_exit_2(capsys, ["compute", str(trader), "--out", str(out)], "does not exist")
    assert hashlib.sha256(trader.read_bytes()).hexdigest() == before


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads any file; simulated below")
def test_compute_on_an_unreadable_file_is_one_line_exit_2(tmp_path, capsys):
    from rootvar.addin.workbooks.build import build_all

    trader = build_all(tmp_path)[0]
    trader.chmod(0)
    _one_line_exit_2(capsys, ["compute", str(trader)], "cannot be read")


def test_compute_on_an_unreadable_file_as_root_simulated(tmp_path, capsys, monkeypatch):
    # root ignores permissions: make the access check answer as it would for a user
    from rootvar.addin import files
    from rootvar.addin.workbooks.build import build_all

    trader = build_all(tmp_path)[0]
    monkeypatch.setattr(files.os, "access", lambda path, mode: False)
    _one_line_exit_2(capsys, ["compute", str(trader)], "permission denied")


def test_workers_below_one_is_an_input_error(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["refresh", "control.xlsx", "--workers", "0"])
    assert stop.value.code == 2
    assert "--workers: must be >= 1, got 0" in capsys.readouterr().err


def test_fractions_are_accepted_where_the_help_shows_them(capsys):
    base = ["report", "--v0", "0.04", "--kappa", "0.5", "--theta", "0.04"]
    base += ["--vol-of-vol", "1", "--rho", "-0.9", "--horizons", "1/4,1"]
    assert main([*base, "--dt", "1/252"]) == 0
    as_fraction = capsys.readouterr().out
    assert main([*base, "--dt", str(1 / 252)]) == 0
    assert capsys.readouterr().out == as_fraction
    with pytest.raises(SystemExit):
        main([*base, "--dt", "1/0"])
    assert "fraction" in capsys.readouterr().err


def test_the_command_line_takes_the_sheet_parameter_aliases(capsys):
    canonical = ["report", "--v0", "0.04", "--kappa", "0.5", "--theta", "0.04"]
    assert main([*canonical, "--vol-of-vol", "1", "--rho", "-0.9"]) == 0
    expected = capsys.readouterr().out
    for aliases in (
        ["--sigma", "1", "--correlation", "-0.9"],
        ["--xi=1", "--rho=-0.9"],
        ["--vol_of_vol", "1", "--Rho", "-0.9"],
    ):
        assert main([*canonical, *aliases]) == 0
        assert capsys.readouterr().out == expected
    assert main(["report", "--initial-variance", "0.04", "--mean-reversion", "0.5",
                 "--long-run-variance", "0.04", "--eta", "1", "--corr", "-0.9"]) == 0  # fmt: skip
    assert capsys.readouterr().out == expected


def test_top_level_help_lists_every_command(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    text = capsys.readouterr().out
    for command in ("report", "demo", "build-workbooks", "compute", "refresh"):
        assert f"\n  {command} " in text


def test_every_numeric_option_states_its_unit(capsys):
    units = ("years", "probability", "annualised", "per year", "per sqrt(year)", "[-1, 1]",
             "path-steps", "whole number")  # fmt: skip
    for command in ("report", "demo", "compute", "refresh"):
        with pytest.raises(SystemExit):
            main([command, "--help"])
        text = " ".join(capsys.readouterr().out.split())
        for option in ("--dt", "--tolerance", "--horizons", "--v0", "--kappa", "--theta",
                       "--vol-of-vol", "--rho", "--workers", "--max-path-steps"):  # fmt: skip
            if f"{option} " in text:
                help_text = text.split(f"{option} ", 2)[-1][:200]
                assert any(u in help_text for u in units), (command, option, help_text)


def test_no_limit_reads_the_same_in_sheets_and_command_line(capsys):
    from rootvar.addin.cli.types import NO_LIMIT, path_steps_cap
    from rootvar.addin.functions import call

    # theta > v0 and c^2 sigma^2 v0 < 4 kappa (theta - v0) v0: no step breaches (the
    # discriminant rule in euler_max_step's docstring, checked in test_variance)
    block = [[0.01], [3.0], [0.04], [0.1], [-0.5]]
    assert call("ROOTVAR_EULER_SAFE_STEP", block, 0.001) == NO_LIMIT
    argv = ["report", "--v0", "0.01", "--kappa", "3", "--theta", "0.04", "--vol-of-vol", "0.1"]
    assert main([*argv, "--rho", "-0.5"]) == 0
    assert f"<= 0.001: {NO_LIMIT}" in capsys.readouterr().out
    assert path_steps_cap(NO_LIMIT) is None


def test_a_closed_output_pipe_ends_quietly(tmp_path):
    argv = [sys.executable, "-m", "rootvar.addin.cli.main", "report", "--v0", "0.04", "--kappa",
            "0.5", "--theta", "0.04", "--sigma", "1", "--rho", "-0.9"]  # fmt: skip
    proc = subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.readline()
    proc.stdout.close()  # the reader goes away, as `| head -1` does
    err = proc.stderr.read().decode()
    code = proc.wait(timeout=120)
    assert "Traceback" not in err and "BrokenPipe" not in err, err
    assert code in (0, 141)


def test_compute_output_follows_the_umask(tmp_path):
    import stat

    from rootvar.addin.workbooks.build import build_all

    trader = build_all(tmp_path)[0]
    old = os.umask(0o022)
    try:
        assert main(["compute", str(trader), "--out", str(tmp_path / "c.xlsx")]) == 0
    finally:
        os.umask(old)
    # a temporary file's private 0600 must not survive the move (common practice, no source)
    assert stat.S_IMODE((tmp_path / "c.xlsx").stat().st_mode) == 0o644


# ----------------------------------------------------------------- the report's Greeks block

_PARAMS = ["--v0", "0.09", "--kappa", "1.3", "--theta", "0.11", "--vol-of-vol", "0.95",
           "--rho", "-0.52"]  # fmt: skip


def test_report_prints_the_fourier_greeks_of_the_option_after_the_variance_report(capsys):
    import io

    from rootvar.addin.cli.report import print_report
    from rootvar.addin.cli.text import CAUTION
    from rootvar.addin.functions import GREEK_LABELS
    from rootvar.core import GREEK_NAMES, GREEK_UNITS, HestonParams, __version__, heston_greeks

    argv = ["report", *_PARAMS, "--horizons", "1,5", "--spot", "38.6", "--strike", "40",
            "--maturity", "1", "--rate", "0.031", "--div-yield", "0.042",
            "--kind", "put"]  # fmt: skip
    assert main(argv) == 0
    out = capsys.readouterr().out
    # the variance report's lines come first, unchanged
    p = HestonParams(0.09, 1.3, 0.11, 0.95, -0.52)
    above = io.StringIO()
    print_report(p, [1.0, 5.0], 1 / 252, 1e-3, above)
    assert out.startswith(f"rootvar {__version__} variance report\n" + above.getvalue())
    assert out.rstrip().endswith(CAUTION)
    block = out[len(above.getvalue()) :]
    assert "Greeks of a European put: strike 40, 1 y to expiry, spot 38.6, rate 0.031, " \
        "dividend yield 0.042" in block  # fmt: skip
    g = heston_greeks(p, 38.6, 40.0, 1.0, 0.031, 0.042, "put")
    price = next(x for x in block.splitlines() if x.strip().startswith("price"))
    assert f"{g.price:.6g}" in price and price.endswith("ccy")
    for name in GREEK_NAMES:
        line = next(x for x in block.splitlines() if x.strip().startswith(GREEK_LABELS[name]))
        assert f"{g.values[name]:.6g}" in line and line.endswith(GREEK_UNITS[name]), line
    assert "per 1.00 (100 vol points) of volatility" in block


def test_report_greeks_default_to_an_at_the_money_call_on_100_for_a_year(capsys):
    assert main(["report", *_PARAMS]) == 0
    out = capsys.readouterr().out
    assert "Greeks of a European call: strike 100, 1 y to expiry, spot 100, rate 0, " \
        "dividend yield 0" in out  # fmt: skip
    assert main(["report", *_PARAMS, "--spot", "50"]) == 0
    assert "call: strike 50, 1 y to expiry, spot 50," in capsys.readouterr().out


@pytest.mark.parametrize(
    "option, fragment",
    [
        (["--spot", "-5"], "--spot must be > 0, got -5.0"),
        (["--spot", "abc"], "--spot must be a number or a fraction such as 1/252, got 'abc'"),
        (["--strike", "0"], "--strike must be > 0, got 0.0"),
        (["--strike", "1e-12"], "--strike / --spot must lie in"),
        (["--maturity", "1000"], "--maturity must lie in [0.001, 100] years, got 1000.0"),
        (["--maturity", "0"], "--maturity must be > 0"),
        (["--rate", "2"], "--rate must lie in [-1, 1], got 2.0"),
        (["--div-yield", "1/0"], "--div-yield must be a number or a fraction"),
        (["--div-yield", "nan"], "--div-yield must be a number or a fraction"),
        (["--kind", "straddle"], "--kind must be one of call, put, got 'straddle'"),
    ],
)
def test_report_bad_option_is_one_line_exit_2_naming_it_before_any_output(capsys, option, fragment):
    assert main(["report", *_PARAMS, *option]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""  # refused before the variance report starts
    err = captured.err.strip()
    assert len(err.splitlines()) == 1 and fragment in err and "Traceback" not in err, err
