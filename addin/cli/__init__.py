"""The ``rootvar`` command line.  Kept empty: the console command enters through ``launch``,
which must import nothing heavy before its guard."""
