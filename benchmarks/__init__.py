"""rootvar benchmarks: ``make bench`` or ``python -m benchmarks [name ...]``.

Each benchmark prints medians over repeats and the ratio against a baseline
measured in the same run.  They are not tests and assert nothing.
"""
