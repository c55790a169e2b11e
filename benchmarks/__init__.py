"""Benchmarks of xcheck: ratios measured side by side in one run.

Run all of them and write ``BENCHMARKS.md`` with ``python -m benchmarks`` (see
:mod:`benchmarks.__main__` and ``benchmarks/README.md``).
"""
