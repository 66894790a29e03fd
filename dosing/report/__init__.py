"""Every rendering: what people read, from typed results, in one place.

What lives here: unit systems (:mod:`.units`), findings in words
(:mod:`.words`), numbers (:mod:`.numbers`), the view of a plan built once
(:mod:`.view`) and its renderings, JSON (:mod:`.plan_json`) and the dose
sheet (:mod:`.sheet`, :mod:`.text`); replays and fleets
(:mod:`.replay_text`), bench titrations (:mod:`.titration`), the sweep grid
(:mod:`.sweep_sheet`), shift-log entries (:mod:`.logview`) and the PNG
figures (:mod:`.plot`). A renderer reads typed results, never another
renderer's output.

What it may import: everything below it (:mod:`dosing.io`, the planning
layer, :mod:`dosing.chem`). Nothing below imports it.
"""
