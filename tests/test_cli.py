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
