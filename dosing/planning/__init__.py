"""The planning layer: from measurements and a job to a dose, its risks and its record.

What lives here: effluent inference (:mod:`.effluent`), the reagent catalogue
(:mod:`.reagents`), the dose plan (:mod:`.plan`), the chemistry checks
(:mod:`.hazards`), solids and metals (:mod:`.solids`), how sure the dose is
(:mod:`.precision`, :mod:`.uncertainty`), control design (:mod:`.control`),
sweeps (:mod:`.sweep`), bench titration (:mod:`.titration`,
:mod:`.buffer_fit`) and the replay kernel (:mod:`.replay`).

What it may import: :mod:`dosing.chem` and :mod:`dosing.errors`. It is pure:
no printing, no files, no user interface; results are frozen dataclasses and
numpy arrays.
"""
