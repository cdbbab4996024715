"""Fleet planning: which copies go on which plate of which printer, and when.

Modules: :mod:`timemodel` (plate time and material), :mod:`bounds` (lower
bounds), :mod:`calendar` (operator shifts), :mod:`planner` (the plan, with
:mod:`records`, :mod:`builder`, :mod:`improve`, :mod:`planbounds`),
:mod:`schedule` and :mod:`contents` (CP-SAT models), :mod:`daygen` and
:mod:`command` (the benchmark). The stage asks the caller "does this set fit on this plate?"
through a callable and never imports the nesting engine itself.
"""
