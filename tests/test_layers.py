"""The core never imports the spreadsheet layer, xlwings or openpyxl."""

import subprocess
import sys
import textwrap


def test_core_imports_with_spreadsheet_libraries_blocked():
    code = textwrap.dedent(
        """
        import sys
        class Block:
            def find_spec(self, name, path=None, target=None):
                top = name.split(".")[0]
                if top in {"xlwings", "openpyxl"} or name.startswith("rootvar.addin"):
                    raise ImportError("blocked: " + name)
        sys.meta_path.insert(0, Block())
        import rootvar.core
        for name in rootvar.core.__all__:  # names load on first use: load every one
            getattr(rootvar.core, name)
        rootvar.core.feller_ratio(1.0, 0.04, 0.5)
        assert not any(m.startswith(("xlwings", "openpyxl", "rootvar.addin")) for m in sys.modules)
        """
    )
    subprocess.run([sys.executable, "-c", code], check=True)


def test_public_names_are_the_functions_not_their_modules_and_load_on_first_use():
    code = textwrap.dedent(
        """
        import inspect, sys
        from rootvar.core import HestonParams, heston_price, mc_price
        p = HestonParams(0.04, 1.5, 0.04, 0.5, -0.7)
        heston_price(p, 100.0, 100.0, 1.0)
        mc_price(p, 100.0, 100.0, 1.0, paths=2_000)
        # a first price and run pay for their engines only (README, cold start)
        heavy = ("pandas", "scipy.stats", "rootvar.core.calibration.fit")
        heavy = [m for m in heavy if m in sys.modules]
        assert heavy == [], heavy
        import rootvar.core as core
        # modules loaded in any order
        import rootvar.core.montecarlo.exotic, rootvar.core.checks.exotic
        for name in core.__all__:
            assert not inspect.ismodule(getattr(core, name)), name
        assert "calibrate" in dir(core)
        """
    )
    subprocess.run([sys.executable, "-c", code], check=True)
