"""Files in and out: scenario files, logged data, bench titrations, the shift log.

What lives here: safe writes (:mod:`.files`), the scenario reader and writer
(:mod:`.scenario`), the replay and titration readers (:mod:`.replay_io`,
:mod:`.titration_io`), fleet files and their Dask run (:mod:`.fleet`) and the
SQLite shift log (:mod:`.shiftlog_file` for the file, :mod:`.shiftlog` for
its entries).

What it may import: the planning layer, :mod:`dosing.chem` and
:mod:`dosing.errors` (the engine below never opens a file: these modules
read and hand it data). Every error names the file and the key or row at
fault.
"""
