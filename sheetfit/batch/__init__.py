"""Refreshing many books: one outcome per book, whatever happens to it.

``outcome.refresh_one`` refreshes one book and always returns an :class:`Outcome` (it
never raises), so a pool of processes, a watcher or a cluster can run it for any number
of books and one failing book never stops the others.
"""

from sheetfit.batch.outcome import STATUSES, Outcome, refresh_one, worst_exit

__all__ = ["STATUSES", "Outcome", "refresh_one", "worst_exit"]
