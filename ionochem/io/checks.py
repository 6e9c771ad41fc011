"""Checks of a value against what it names, shared by scenarios, the command line and the
library: the balance ion of a measured electron density.

This module raises nothing itself: each function returns the problem as text (``None``
when there is none) so that each caller raises it at its own place — ``file: key`` in a
scenario, ``--option`` on the command line.
"""

from __future__ import annotations

from ionochem.species import parse_species

__all__ = ["balance_ion_problem"]


def balance_ion_problem(name, species=None) -> str | None:
    """What is wrong with ``name`` as the balance ion (set to Ne minus the other ions).

    Parameters
    ----------
    name : str
        As given (``"O+"``).
    species : collection of str, optional
        The species of the reaction list; when given, the ion must be one of them.

    Returns
    -------
    str or None
        ``None`` for a singly or multiply charged positive ion (of the list); else why not:
        the electron ``e``, a neutral (``N2``), an anion, a name that is no species, an ion
        the reaction list does not have (``Xe+``).
    """
    text = str(name).strip()
    try:
        sp = parse_species(text)
    except ValueError as exc:
        return f"{text!r} is not a species name ({exc})"
    if sp.name == "e":
        return ("'e' is the electron density itself; the balance ion is the positive ion "
                "set to Ne minus the other ions (usually O+)")
    if sp.charge <= 0:
        kind = "neutral" if sp.charge == 0 else "a negative ion"
        return (f"{sp.name!r} is {kind}; the balance ion must be a positive ion (usually O+)")
    if species is not None and sp.name not in set(species):
        return (f"{sp.name!r} is not a species of the reaction list; give one of its positive "
                "ions (usually O+)")
    return None
