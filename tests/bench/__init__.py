"""Benchmarks: speed and scale of schedwidget side by side with the usual way, in one run.

Run them with ``python -m tests.bench`` from the repository root (``--quick`` for
the smallest sizes, ``--out PATH`` for the JSON file; default
``bench-results/latest.json``).  The case modules are named ``bench_*.py`` so
the default pytest run does not collect them; ``tests/test_bench_smoke.py``
runs every case once at its smallest size.
"""
