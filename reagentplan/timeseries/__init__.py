"""Time-series models fitted on the workbook's history, shared by the deterministic
balance and the forecast.

- `generation`: per unit, the load-factor model fitted on ``generation_history``
  (season, weekday, AR noise, forced outages); `generation.median_generation` is the
  generation of every planned day (the dispatch plan, else the model's median), which
  `reagentplan.balance` uses, and the samplers are what `reagentplan.forecast` draws
  futures from.
- `noise`: AR(p) noise (fit, mean and spread ahead, simulation); `outages`: forced
  outages as an alternating renewal process; `streams`: reproducible random streams;
  `memo`: a fit remembered per scenario object.

This package sits below `reagentplan.balance`, which sits below `reagentplan.forecast`:
nothing here imports either of them.
"""
