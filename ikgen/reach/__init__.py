"""Reach maps: where an arm reaches a box of positions in chosen tool orientations.

grid.py (positions and poses of the map), orientations.py (named orientation sets and rotation
files), core.py (per-pose figures from any solver with the batch interface), solvers.py (the
generated numpy and compiled C solvers as workers use them, the chunk function), run.py (running
the chunks here, on local processes or threads, or on a Dask cluster; retries), maps.py (the
map as data and the call that computes it), outputs.py (the .npz, CSV, pictures and page),
command.py (`ikgen reach`). docs/reach.md is the user's guide.
"""
