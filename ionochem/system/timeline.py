"""The column's environment through time: neutrals and temperatures that follow the clock.

A transient or diurnal run moves the sun every 60 s (``environment/sun.py``). Here the rest
of the environment follows time too: the neutral atmosphere (pymsis, or the scenario's
table), the temperatures and the photo rates they attenuate are rebuilt at **nodes** every
:data:`NODE_STEP_S` from the scenario's time, and every quantity the chemistry reads — the
rate coefficients k(t) and the fixed densities (neutrals, third body) — is interpolated
linearly in time between the two nodes around t. Each node's sun still moves: a node
evaluates its photo rates at the offset t − t_node, so the terminator is followed to the
second and the neutral state to the node step.

Between nodes the neutrals change by a fraction of their diurnal amplitude: with a 15-min
step the linear interpolation is within ~1e-3 of the neutral model at mid-node
*(measured on the sunset demo: tests/test_time_varying.py reports it)*; the nodes themselves
equal the neutral model exactly. Transport coefficients stay those of the start (the
diffusion coefficient's change over a few hours is a second-order effect on the F layer
*(common practice)*), as does any prescribed production.

This module only builds and interpolates; the caller (``ionochem.model``) decides when the
environment follows time (``[solve] freeze_environment``).
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np

from ionochem.environment.column import build_environment
from ionochem.system.assembly import given_densities

#: Seconds between the environment's nodes *(common practice: the neutral atmosphere
#: changes on the scale of hours; the sun, which changes faster, is followed every 60 s
#: within each node)*.
NODE_STEP_S = 900.0


class EnvironmentTimeline:
    """Rate coefficients and fixed densities of a model at any time of its run.

    Parameters
    ----------
    build : callable
        ``build(utc) -> (rates, given, environment)``: the model's :class:`ColumnRates`,
        fixed densities (A, G) and environment for the scenario moved to ``utc``.
    start : (rates, given, environment)
        Those of the scenario's own time (node 0), already built.
    utc0 : datetime.datetime
        The scenario's time.
    step_s : float
        Seconds between nodes.
    """

    def __init__(self, build, start, utc0, step_s=NODE_STEP_S):
        self._build = build
        self.utc0 = utc0
        self.step_s = float(step_s)
        self._nodes = {0: start}

    def node(self, j):
        """``(rates, given, environment)`` of node j (time j · step), built once."""
        if j not in self._nodes:
            utc = self.utc0 + dt.timedelta(seconds=j * self.step_s)
            self._nodes[j] = self._build(utc)
        return self._nodes[j]

    def _around(self, time_s):
        """``((j, weight), ...)``: the nodes whose weighted sum gives ``time_s``."""
        t = max(float(time_s), 0.0)
        x = t / self.step_s
        j = math.floor(x)
        w = x - j
        if w < 1e-12:
            return ((j, 1.0),)
        return ((j, 1.0 - w), (j + 1, w))

    def rate_coefficients(self, time_s):
        """k (altitude, reaction) at ``time_s``: each node's rates with its own sun at the
        offset ``time_s − t_node``, blended linearly."""
        out = None
        for j, w in self._around(time_s):
            rates = self.node(j)[0]
            part = w * rates(time_s - j * self.step_s)
            out = part if out is None else out + part
        return out

    def given(self, time_s):
        """Fixed densities (altitude, given species) at ``time_s``, cm-3."""
        return sum(w * self.node(j)[1] for j, w in self._around(time_s))

    def field(self, time_s, read):
        """``read(environment)`` (an array on the grid: Tn, a neutral density) at
        ``time_s``, interpolated like the rates."""
        return sum(w * np.asarray(read(self.node(j)[2]), float)
                   for j, w in self._around(time_s))


def model_timeline(model):
    """The environment through time of ``model``'s transient or diurnal run whose neutrals
    come from a neutral model (not a table), or None: a steady run, a scenario that freezes
    its environment (``[solve] freeze_environment = true``), or one without a time."""
    scen = model.scenario
    if scen.solve.mode == "steady" or scen.solve.freeze_environment or scen.time is None \
            or scen.neutrals.model == "table":
        return None

    def build(utc):
        env = build_environment(scen.replace(time=type(scen.time)(utc=utc)), model.needs)
        return model.rates_on(env), given_densities(model.mechanism, env), env

    start = (model.rates_on(model.environment), model.given, model.environment)
    return EnvironmentTimeline(build, start, scen.time.utc)
