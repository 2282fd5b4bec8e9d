"""Imported only by the fork server of the batch's worker processes (as a preload).

The fork server is started by the batch process; importing this module makes
the kernel kill it the moment the batch process dies (Linux
``PR_SET_PDEATHSIG``), and its workers, which carry the same setting towards
the fork server (:func:`pointsift.lifetime.die_with_parent`), die with it.
Elsewhere it does nothing.
"""

from .lifetime import _set_parent_death_signal

__all__: list[str] = []

_set_parent_death_signal()
