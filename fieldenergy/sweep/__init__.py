"""Parameter sweeps a case file declares: ``[[sweep]]`` tables -> variants of the case document.

A case varies one or more of its values with ``[[sweep]]`` tables::

    [[sweep]]
    name = "gap"                          # letters, digits, '_' and '-'; names the variants
    key = "coil.upper.path.center.2"      # the value to vary
    values = ["20 mm", "35 mm", "50 mm"]  # plain numbers or quantity strings, or else
    # start = "20 mm"                     # ... evenly spaced values, both ends included
    # stop = "50 mm"
    # count = 4

``key`` is a dotted address into the case document. In a table a part names a key; in an
array of tables (``[[coil]]``, ``[[circuit]]``) it names a table by its ``name`` (or, when
no table has that name, by its 0-based position); in an array of numbers (a vector such as
``center``) it is a 0-based index. The address must end at one number or quantity string;
its last part may name a key the table does not hold yet (``"coil.upper.turns"``). The
values of one sweep are all plain numbers (SI, as everywhere in a case file) or all
quantity strings of one kind (length, angle, current or resistance), converted to SI for
plots; they must differ from one another. A case expands to at most
:data:`~fieldenergy.sweep.declaration.MAX_VARIANTS` variants.

Several sweeps give every combination of their values (the outer product), the first sweep
varying slowest. Each variant is the document with the values set, the ``[[sweep]]`` tables
removed and the values appended to the title; :func:`fieldenergy.caseio.read_case_document`
checks it like any case. ``fieldenergy solve`` ignores the sweeps (it solves the base values);
``fieldenergy batch`` solves the variants, not the base case.
"""

from __future__ import annotations

from fieldenergy.sweep.declaration import MAX_VARIANTS, Sweep, SweepValue, read_sweeps
from fieldenergy.sweep.variants import Variant, expand

__all__ = ["MAX_VARIANTS", "Sweep", "SweepValue", "Variant", "expand", "read_sweeps"]
