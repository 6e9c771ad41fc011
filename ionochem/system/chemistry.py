"""The chemistry of a reaction list as a row process of the column system.

Each altitude row's densities change by the reactions of the mechanism with that row's rate
coefficients and fixed (neutral, given-electron) densities; rows do not interact. The
arithmetic is the mechanism's own (:class:`ionochem.mechanism.rows.BoundRows`: rate
coefficients folded with the fixed reactants once, the Jacobian from the sparse kernel).
"""

from __future__ import annotations

import numpy as np

from ionochem.mechanism.rows import BoundRows
from ionochem.system.process import Process


class Chemistry(Process):
    """The reactions of ``mechanism`` on B rows.

    Parameters
    ----------
    mechanism : Mechanism
        Compiled mechanism (``solved``, array methods).
    k : ndarray (B, R) or callable
        Rate coefficients of every row (cm3 s-1, s-1 or cm6 s-1 by order), or a function
        ``k(time_s)`` returning them (time in s after the scenario's time; ``None`` the
        scenario's time) for columns whose sun moves.
    given : ndarray (B, G) or callable
        Fixed densities of each row, cm-3, in ``mechanism.given`` order, or a function
        ``given(time_s)`` returning them (neutrals that follow time).
    """

    name = "chemistry"
    unknowns = ("density",)
    reads = ("density",)

    def __init__(self, mechanism, k, given, *, time_s=None):
        self.mechanism = mechanism
        self._k = k
        self._given = given if callable(given) else np.asarray(given, float)
        self.time_s = time_s
        self._bound = None

    @property
    def k(self):
        """Rate coefficients (B, R) at this process's time."""
        return self._k(self.time_s) if callable(self._k) else self._k

    @property
    def given(self):
        """Fixed densities (B, G) at this process's time."""
        return self._given(self.time_s) if callable(self._given) else self._given

    @property
    def bound(self):
        """The mechanism bound to these rows (:class:`BoundRows`), built once."""
        if self._bound is None:
            self._bound = BoundRows(self.mechanism, np.asarray(self.k, float), self.given)
        return self._bound

    @classmethod
    def for_model(cls, model, k=None, given=None):
        """The chemistry of ``model``'s mechanism on its rows (rates following time), or on
        stacked rows with rate coefficients ``k`` (B, R) and fixed densities ``given``."""
        if k is None:
            return cls(model.mechanism, model.rate_coefficients,
                       model.given_at if given is None else given)
        return cls(model.mechanism, np.asarray(k, float),
                   model.given if given is None else given)

    def at(self, time_s):
        if not callable(self._k) and not callable(self._given):
            return self
        return Chemistry(self.mechanism, self._k, self._given, time_s=time_s)

    def tendency(self, n, rows):
        return self.bound.tendency(n, rows)

    def evaluate(self, n):
        # The mechanism's own rates r = k Π n (Model.tendency's arithmetic since the first
        # release); the solvers' kernel folds the fixed densities into k first, which equals
        # it to rounding — the time integration keeps this form so its steps do not move.
        return self.mechanism.tendency(n, self.k, self.given)

    def gross(self, n, rows):
        return self.bound.gross(n, rows)

    def tendency_gross(self, n, rows):
        return self.bound.both(n, rows)

    def blocks(self, n, rows):
        return self.bound.jacobian(n, rows)
