"""Every rendering: what people read, from text sheets to JSON and figures.

What lives here: the dose sheet and its JSON (:mod:`.sheet`), the sweep grid
(:mod:`.sweep_sheet`), shift-log entries as text (:mod:`.logview`) and the
PNG figures (:mod:`.plot`).

What it may import: everything below it (:mod:`dosing.io`, the planning
layer, :mod:`dosing.chem`). Nothing below imports it.
"""
