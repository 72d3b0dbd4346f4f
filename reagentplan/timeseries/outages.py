"""Forced outages of a generating unit: estimated from the history, sampled as a
two-state (on line / off line) alternating renewal process.

A day counts as off line when the unit made less than `OFF_LINE_LOAD_FACTOR` of its
capacity × 24 h.  Runs of such days are outages.  Runs of `PLANNED_OUTAGE_DAYS` or more
are taken as planned overhauls: a forecast cannot know their dates, so they are left
out of the forced-outage figures (put planned outages in the ``generation`` sheet as
zero rows).  The forced outages give

- the chance per day on line that a forced outage starts (a constant hazard, so the
  time on line between outages is geometric), and
- the observed outage lengths, drawn at random for each sampled outage.

References
----------
Billinton, R. and Allan, R. N. (1996), *Reliability Evaluation of Power Systems*, 2nd
ed., Plenum Press, ch. 2 and 10: the two-state unit model, failure rate and repair
time estimated from operating history, forced outage rate.
Cox, D. R. (1962), *Renewal Theory*, Methuen: alternating renewal processes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Below this share of capacity × 24 h a day counts as off line [-] (a stated threshold).
OFF_LINE_LOAD_FACTOR = 0.05
#: Off-line runs this long or longer are taken as planned, not forced [d].
PLANNED_OUTAGE_DAYS = 14


@dataclass(frozen=True)
class OutageModel:
    """Forced outages of one unit.

    Attributes
    ----------
    failure_prob : float
        Chance that a forced outage starts on a day the unit is on line [1/d].
    lengths : tuple[int, ...]
        Observed forced-outage lengths [d], drawn with equal weight.
    remaining : tuple[int, ...]
        For an outage still running on the last history day: the days it may still last
        [d] (from the longer outages seen); empty when the unit was on line then, or when
        no longer outage was seen (it is then assumed back on the next day).
    off_at_end : int
        Days the unit had been off line at the end of the history [d] (0 = on line).
    forced_runs, planned_runs, days_on_line : int
        What the estimate rests on, for the notes.
    """

    failure_prob: float
    lengths: tuple[int, ...]
    remaining: tuple[int, ...] = ()
    off_at_end: int = 0
    forced_runs: int = 0
    planned_runs: int = 0
    days_on_line: int = 0

    @property
    def mean_length(self) -> float:
        return float(np.mean(self.lengths)) if self.lengths else 0.0

    def describe(self) -> str:
        if not self.lengths or self.failure_prob <= 0:
            text = f"no forced outage in the history ({self.days_on_line} days on line)"
        else:
            lo, hi = min(self.lengths), max(self.lengths)
            span = f"{lo} d" if lo == hi else f"{lo}-{hi} d"
            text = (f"forced outages {self.failure_prob * 365:.1f} per year on line "
                    f"({self.forced_runs} seen), lasting {span}")
        if self.planned_runs:
            text += (f"; {self.planned_runs} outage(s) of {PLANNED_OUTAGE_DAYS} d or more "
                     "taken as planned and left out")
        if self.off_at_end:
            back = (f"up to {max(self.remaining)} more day(s)" if self.remaining
                    else "assumed back on the next day")
            text += f"; off line for the last {self.off_at_end} history day(s): {back}"
        return text


NO_OUTAGES = OutageModel(0.0, ())


def off_line_runs(off: np.ndarray) -> list[tuple[int, int]]:
    """Runs of True in a boolean day array: (first index, length) [d]."""
    off = np.asarray(off, dtype=bool)
    edges = np.diff(np.concatenate(([0], off.astype(np.int8), [0])))
    starts = np.flatnonzero(edges == 1)
    ends = np.flatnonzero(edges == -1)
    return [(int(s), int(e - s)) for s, e in zip(starts, ends)]


def fit_outages(load_factor: np.ndarray) -> OutageModel:
    """Forced-outage rate and lengths from a daily load-factor history [-].

    Runs touching either end of the history are censored: their length is not known,
    so they count towards the rate (a run at the end) but not the lengths, unless no
    complete run exists.

    References
    ----------
    Billinton and Allan (1996) §2.5: failure rate = failures / time in the up state;
    repair times from the observed down times.  Here in days: failures / days at risk.
    """
    lf = np.asarray(load_factor, dtype=float)
    n = len(lf)
    off = lf < OFF_LINE_LOAD_FACTOR
    runs = off_line_runs(off)
    forced = [(s, k) for s, k in runs if k < PLANNED_OUTAGE_DAYS]
    planned = len(runs) - len(forced)
    complete = [k for s, k in forced if s > 0 and s + k < n]
    lengths = tuple(complete or [k for _, k in forced])
    starts = sum(1 for s, _ in forced if s > 0)
    on_line = int((~off).sum())
    # a day is at risk if the unit is on line that morning: the days on line and the
    # days an outage began (the hazard's maximum-likelihood estimate)
    prob = starts / (on_line + starts) if on_line else 0.0
    off_at_end = runs[-1][1] if runs and runs[-1][0] + runs[-1][1] == n else 0
    remaining: tuple[int, ...] = ()
    if off_at_end:
        seen = [k for s, k in runs if s > 0 and s + k < n]
        remaining = tuple(k - off_at_end for k in seen if k > off_at_end)
    return OutageModel(float(prob), lengths, remaining, off_at_end, len(forced), planned, on_line)


def simulate_outages(model: OutageModel, rng: np.random.Generator, n: int, f: int,
                     start_off: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Sample off-line days and restart days of ``f`` futures over ``n`` days, time-major.

    Each day on line an outage starts with chance ``failure_prob``, so the days on line
    up to and including the day an outage starts are geometric; its length is drawn from
    ``lengths``.  The draws go outage by outage, all futures at once: a few draws per
    outage instead of one per day.

    Parameters
    ----------
    rng : the unit's random stream.
    n, f : days [d] and futures.
    start_off : False to start every future on line (a dispatch plan says it runs);
        True lets an outage running at the end of the history carry on.

    Returns
    -------
    (off, restart) : (n, f) bool
        Off line [-]; first day back on line after an outage [-].

    References
    ----------
    Billinton and Allan (1996) §2.5, §10.2: the two-state model with a constant failure
    rate (geometric up times, in days) and empirical repair times.
    """
    free_from = np.zeros(f, dtype=np.int64)  # first day each future is on line again
    events: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []  # (first day, future, days)
    carried_over = start_off and model.off_at_end > 0
    if carried_over and model.remaining:
        rem = np.asarray(model.remaining, dtype=np.int64)
        free_from[:] = rem[np.minimum((rng.random(f) * len(rem)).astype(np.int64), len(rem) - 1)]
        events.append((np.zeros(f, dtype=np.int64), np.arange(f), free_from.copy()))
    p = model.failure_prob
    lengths = np.asarray(model.lengths, dtype=np.int64)
    if p > 0 and len(lengths):
        todo = np.arange(f)[free_from < n]
        while len(todo):
            k = free_from[todo] + rng.geometric(p, len(todo)) - 1  # the day it fails
            length = lengths[rng.integers(0, len(lengths), len(todo))]
            inside = k < n
            todo, k, length = todo[inside], k[inside], length[inside]
            events.append((k, todo, length))
            free_from[todo] = k + length
            todo = todo[free_from[todo] < n]
    edges = np.zeros((n + 1, f), dtype=np.int8)
    back = np.zeros((n + 1, f), dtype=bool)
    if carried_over:
        back[0] = True  # back on line on the first day unless still out
    if events:
        k, who, length = (np.concatenate(x) for x in zip(*events))
        end = np.minimum(k + length, n)
        edges[k, who] += 1  # one start per (day, future): no repeated index
        np.subtract.at(edges, (end, who), 1)  # ends past the horizon share row n
        back[end, who] = True
    off = np.cumsum(edges[:n], axis=0, dtype=np.int8) > 0
    restart = back[:n] & ~off
    return off, restart


def off_line_probability(model: OutageModel, n: int, start_off: bool = True) -> np.ndarray:
    """Exact chance [-] that the unit is off line on each of the next ``n`` days, for
    the process `simulate_outages` samples (its state distribution, stepped day by day).
    """
    lengths = np.asarray(model.lengths, dtype=np.int64)
    top = int(max([1, *model.lengths, *model.remaining]))
    dist = np.zeros(top + 1)  # chance of k days still to run, entering the day
    if start_off and model.off_at_end and model.remaining:
        for k in model.remaining:
            dist[k] += 1.0 / len(model.remaining)
    else:
        dist[0] = 1.0
    p = model.failure_prob if len(lengths) else 0.0
    new = np.bincount(lengths, minlength=top + 1)[: top + 1] / max(len(lengths), 1)
    out = np.empty(n)
    for k in range(n):
        on = dist[0]
        today = dist.copy()
        today[0] = on * (1 - p)
        today += on * p * new
        out[k] = 1.0 - today[0]
        dist = np.zeros_like(today)
        dist[0] = today[0] + today[1]
        dist[1:-1] = today[2:]
    return out
