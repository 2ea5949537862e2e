"""The cell about the library itself: ROOTVAR_VERSION.

Imported first by :mod:`rootvar.addin.functions`, so it heads the registry.
"""

from __future__ import annotations

from rootvar.addin.functions.registry import sheet_function
from rootvar.core import __version__

__all__ = ["ROOTVAR_VERSION"]


@sheet_function("text: the installed rootvar version")
def ROOTVAR_VERSION():
    """Version of the rootvar library behind these functions."""
    return f"rootvar {__version__}"
