"""Scan layer: grids, point identity, planning into chunks, the segment store, tables, audits.

This layer reads and writes files; the physics it calls (:func:`holoscan.solve_point`) does not.
Nothing here imports Snakemake: the workflow rules call these functions through the command line.
"""
