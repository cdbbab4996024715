"""Fleet planning: which copies go on which plate of which printer, and when.

Modules: :mod:`timemodel` (plate time and material), :mod:`bounds` (lower
bounds), :mod:`calendar` (operator shifts), :mod:`planner` (the plan, with
:mod:`records`, :mod:`builder`, :mod:`improve`, :mod:`lowfill`, :mod:`planbounds`,
:mod:`clock`), :mod:`scoring` (how plans compare), :mod:`timing` (real seconds and
ticks, re-timing, sequencing), :mod:`schedule` and :mod:`contents` (CP-SAT models).
The benchmark and its generated days live in :mod:`packer.bench`. The stage asks
the caller "does this set fit on this plate?" through a callable and never imports
the nesting engine itself.
"""
