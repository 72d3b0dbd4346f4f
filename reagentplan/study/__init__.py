"""Studies: many plans of variants of one scenario, run on Dask distributed.

- `grid`: the ``--vary`` specs, the full grid of variants and its validation.
- `run`: one case, a pure function: plan the variant and replay it against the
  shared futures; a plain result row.
- `cluster`: a `LocalCluster` or an existing scheduler; the shared futures scattered
  once; cases submitted, timed out, failed or interrupted without stopping the rest.
- `results`: the study table and the winner within the risk level.
"""

from .grid import MAX_CASES, Case, Grid, VarySpec, build_grid, parse_vary

__all__ = ["MAX_CASES", "Case", "Grid", "VarySpec", "build_grid", "parse_vary"]
