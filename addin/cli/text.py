"""Texts shared by the command line, reports and workbooks."""

CAUTION = (
    "Caution: rootvar outputs support, and do not replace, independent model validation "
    "under your own model-risk policy."
)
