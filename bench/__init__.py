"""Benchmarks at national scale (issue 8): ``make bench`` / ``python -m bench [--quick] [--scales ...]``.

* :mod:`bench.synthetic`: the deterministic invented federation (50 states, 27 cycles, about
  210,000 contests at scale 1), written as native CSV files into a temp folder;
* :mod:`bench.stages`: each timed stage, run in a fresh process (peak RSS per stage);
* :mod:`bench.baselines`: the plain baselines (per-unit measures loop, rejection sampling);
* ``python -m bench``: runs the stages at each scale, prints the table of measured ratios against
  the targets and writes ``bench/results/latest.json`` (not committed).

A missed target is a finding, printed and written down; the benchmark never fails on it.
"""
