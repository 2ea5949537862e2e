"""The variance cells, called as xlwings would call them: ROOTVAR_VARIANCE_TABLE."""

from support.cells import BLOCK

from rootvar.addin.functions import call


def test_variance_table_spills_a_header_and_one_row_per_horizon():
    rows = call("ROOTVAR_VARIANCE_TABLE", BLOCK, [[0.5], [1.0], [2.0]], [[0.01], [0.5]])
    assert rows[0][0] == "horizon (years)" and len(rows) == 4
    assert all(len(r) == len(rows[0]) for r in rows)
    assert rows[3][0] == 2.0
