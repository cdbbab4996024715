"""Fleet planning: which copies go on which plate of which printer, and when.

Modules: :mod:`timemodel` (plate time and material), :mod:`bounds` (lower
bounds), :mod:`calendar` (operator shifts), :mod:`planner` (the plan as phases),
:mod:`view` and :mod:`budget` (what every step is given), the steps :mod:`builder`,
:mod:`merge`, :mod:`improve`, :mod:`lowfill`, :mod:`planbounds`, :mod:`check`;
:mod:`records` (data), :mod:`clock` (the work clock), :mod:`scoring` (how plans
compare), :mod:`timing` (real seconds and ticks, re-timing, sequencing),
:mod:`schedule` and :mod:`contents` (CP-SAT models). The benchmark and its
generated days live in :mod:`packer.bench`. The stage asks the layout service
(:mod:`packer.layouts`) "does this set fit on this plate?" and never imports an
engine itself.
"""
