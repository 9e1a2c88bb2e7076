"""Bases shared by the tests of several directories (on the path through pytest's
``pythonpath`` setting).

``SULT`` is the Makeham law of the Standard Ultimate Life Table, A = 0.00022, B = 2.7e-6,
c = 1.124, as published in Dickson, Hardy and Waters, Actuarial Mathematics for Life
Contingent Risks (parameters quoted from memory); ``I5`` is 5% a year. ``TABLE`` is a
synthetic table for identities (q rising 10% a year from age 30, closing with 1), not data.
"""

from __future__ import annotations

from service.core import laws, tables
from service.core.values import Discount

SULT = laws.Makeham(A=0.00022, B=2.7e-6, c=1.124)
TABLE = tables.LifeTable(30, [0.001 * 1.1**k for k in range(70)] + [1.0], "udd")
I5 = Discount.constant(0.05)
