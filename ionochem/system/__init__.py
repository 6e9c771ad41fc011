"""The column system: a state on the altitude grid and the processes that change it.

The state of a column is one array shaped (altitude row, unknown): today the solved species'
densities (cm-3), in the mechanism's order; temperatures (Te, Ti, Tv) join as further
unknowns of each row when an energy balance is registered. Every process contributes to the
same state:

- its tendency d(unknown)/dt, shaped like the state;
- its gross production and loss (each shaped like the state), which scale the steady
  solver's convergence rule;
- its Jacobian, either as dense blocks within each altitude row (a *row process*, such as the
  chemistry of :mod:`ionochem.system.chemistry`) or as a constant sparse matrix that couples
  rows (a *coupling process*, such as the field-aligned transport of
  :mod:`ionochem.system.transport`).

:class:`ColumnSystem` sums the processes and is the one path to every solution: the steady
state (Newton row by row when no process couples rows, on the whole column's sparse Jacobian
when one does — :mod:`ionochem.solve.steady`, :mod:`ionochem.solve.column`), the time
integration (``scipy.integrate.solve_ivp`` with the assembled sparse Jacobian,
:mod:`ionochem.solve.transient`) and the Jacobian that exact sensitivities factorise.
:mod:`ionochem.system.rates` evaluates a reaction list's rate coefficients on a column
environment; :mod:`ionochem.system.assembly` checks a reaction list against its environment.

Adding a process is writing one module with a class that follows
:class:`ionochem.system.process.Process` (its unknowns, the unknowns it reads, tendency,
gross rates and Jacobian) and a ``for_model(model, k=None, given=None)`` class method that
builds it for a model (or returns None when the scenario does not ask for it), and adding the
class to :data:`PROCESSES`; docs/design.md ("The column system") walks through an example
and tests/test_system.py adds one.

This package knows the mechanism's array methods and the environment's arrays; it never
reads files and never builds datasets.
"""

from ionochem.system.chemistry import Chemistry
from ionochem.system.column import ColumnSystem
from ionochem.system.process import Process
from ionochem.system.transport import Transport

#: The processes a model's column system is built from, in order (row processes first by
#: convention). Each class's ``for_model`` builds it or returns None.
PROCESSES = [Chemistry, Transport]

__all__ = ["PROCESSES", "Chemistry", "ColumnSystem", "Process", "Transport"]
