"""The planning layer: from measurements and a job to a dose, its risks and its record.

What lives here: the measurements and their check (:mod:`.measurements`),
effluent inference (:mod:`.effluent`, :mod:`.variants`), the reagent
catalogue (:mod:`.reagents`, :mod:`.strengths`), the job's window and amount
(:mod:`.basis`), the dose plan (:mod:`.plan`, :mod:`.plan_findings`,
:mod:`.curve`), the chemistry checks (:mod:`.hazards`), solids and metals
(:mod:`.solids`), how sure the dose is (:mod:`.precision`,
:mod:`.uncertainty`), control design (:mod:`.control`), the scenario as a
job and its plan (:mod:`.job`), sweeps (:mod:`.sweep`), bench titration
(:mod:`.bench`, :mod:`.water_fit`, :mod:`.buffer_fit`, :mod:`.titration`)
and the replay kernel (:mod:`.replay`, :mod:`.replay_totals`). What it has
to say beside its numbers is a :class:`~.findings.Finding`.

What it may import: :mod:`dosing.chem` and :mod:`dosing.errors`. It is pure:
no printing, no files, no user interface, no number formatted into words;
results are frozen dataclasses and numpy arrays.
"""
