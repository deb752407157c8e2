"""The hand method carried out correctly, in part names then numbers (``tauproof derive``).

Symbolic work with sympy, loaded only by this package: ``network`` (symbolic MNA),
``laplace`` (initial- and final-value theorems, characteristic polynomial), ``thevenin``
(R_th of each storage part), ``forms`` (series/parallel forms and the formula text),
``worker`` and ``derivation`` (the steps, each checked against the closed form).  The English
is written by ``harness.report.derivation``.
"""

from .derivation import Derivation, Formula, derive

__all__ = ["Derivation", "Formula", "derive"]
