"""The three-way comparison: hand values against the closed form, the closed form against the
numerical engine, and the verdicts (``outcome``).

One rule (``tolerances.agree``) decides every comparison.  Hand vs closed form uses the
expectation's tolerance (default 1 %); closed form vs numeric uses each field's declared engine
tolerance (``fieldspec.FieldSpec.engine_relative``).  When the engines disagree the field is
``engines-disagree`` and the hand value is not blamed; otherwise a hand value outside tolerance
is a ``mismatch`` whose message says which hand step went wrong (``diagnose``).

Modules, each one responsibility, imported in this order (no cycle):

* ``context``: ``CheckContext`` and the scales (probe scale, noise floor, circuit scales);
* ``message``: the words of an engines-disagree verdict; ``diagnose``: of a hand mismatch;
* ``value``: a field whose values are ``Features`` attributes (before, after, final, τ);
* ``crossing``, ``peak``, ``energy``, ``dominant``, ``ring``: the sign-off fields;
* ``fields``: every field of a check, looping over ``fieldspec.FIELD_SPECS``;
* ``curve``: the first-order curve; ``trace``: the check's waveforms;
* ``check``: one check and one file (``compare_file``).
"""

from .check import compare_check, compare_file, order_problem
from .context import CheckContext, direction, probe_scale
from .value import compare_field

__all__ = ["CheckContext", "compare_check", "compare_field", "compare_file", "direction",
           "order_problem", "probe_scale"]
