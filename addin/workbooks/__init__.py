"""The shipped workbooks: one builder per workbook (``build`` for the trader's, the structurer's
and the control workbook, with the sheets of ``calibration`` and ``exotics``), the shared look
(``style``) and the invented demo desk (``demo_desk``)."""
