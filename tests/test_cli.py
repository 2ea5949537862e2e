"""The rootvar command line."""

from rootvar.addin.cli import main


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
    from rootvar.addin.workbook_build import build_all

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
    ):
        assert line in text
