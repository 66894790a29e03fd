"""Files in and out: scenario files, logged data, bench titrations, the shift log.

What lives here: safe writes (:mod:`.files`), the scenario reader and writer
(:mod:`.scenario`), the replay and titration readers (:mod:`.replay_io`,
:mod:`.titration_io`), fleet files and their Dask run (:mod:`.fleet`) and the
SQLite shift log (:mod:`.shiftlog`).

What it may import: the planning layer, :mod:`dosing.chem` and
:mod:`dosing.errors`. Every error names the file and the key or row at fault.
"""
