"""Test helper: recalculate written books in headless LibreOffice and check cached values.

One job per module:

* ``locate`` finds the engine (soffice and a Python that can import uno);
* ``process`` runs it (:class:`~engine.process.Engine`, with ``uno_worker.py`` under
  the system Python) and recalculates a copy of a book;
* ``recalculated`` holds what a recalculation returns (``RecalcBook`` and its cells);
* ``cached`` reads the cached formula values a book stores, from the package XML;
* ``compare`` compares the two and provides ``assert_cached_values_hold``;
* ``addresses`` has the A1 address helpers, shared by ``cached`` and the worker.
"""
