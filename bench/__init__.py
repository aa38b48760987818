"""Benchmarks of etchguard, run with ``python -m bench`` (``make bench``).

Every module of this package that exposes ``main()`` is a bench; ``bench/__main__.py``
finds and runs them. Results are measured in the run that prints them; machine-readable
copies go to ``bench/out/`` (not tracked).
"""
