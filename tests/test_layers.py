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
        rootvar.core.feller_ratio(1.0, 0.04, 0.5)
        assert not any(m.startswith(("xlwings", "openpyxl", "rootvar.addin")) for m in sys.modules)
        """
    )
    subprocess.run([sys.executable, "-c", code], check=True)
