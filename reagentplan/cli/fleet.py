"""The fleet workbook (``../shared/FLEET.md``) where a station workbook is accepted:
``reagentplan check FLEET.xlsx`` and ``reagentplan plan FLEET.xlsx --out DIR``.  Not a
command of its own: `check` and `plan` hand a workbook with a ``stations`` sheet here."""

from __future__ import annotations

import sys

from .. import CAUTION
from .common import EXIT_BREACH, EXIT_OK, study_interrupted


def is_fleet(path) -> bool:
    from ..fleet import is_fleet_workbook

    return is_fleet_workbook(path)


def check(args) -> int:
    from ..fleet import load_fleet
    from ..summary import describe_scenario, describe_warnings

    fleet = load_fleet(args.workbook)
    print(f"{args.workbook}: the fleet workbook is sound: '{fleet.name}', {len(fleet.stations)} station(s), "
          f"{len(fleet.shared_contracts)} shared contract(s), {len(fleet.shared_train_sets)} shared train set(s).")
    for s in fleet.stations:
        print(f"\n[{s.station}] {s.workbook.name}")
        print(describe_scenario(s.scenario))
        text = describe_warnings(s.scenario.warnings)
        if text:
            print(text)
    return EXIT_OK


def plan(args, settings) -> int:
    from ..fleet import fleet_frames, fleet_summary, load_fleet, plan_fleet, room_went
    from ..output import staged_output
    from ..output.fleet import write_fleet
    from ..summary import describe_warnings

    if args.db or args.calibrated:
        from ..errors import Problem, ScenarioError

        opt = "--db" if args.db else "--calibrated"
        raise ScenarioError(Problem(None, None, opt, f"{opt} with a fleet workbook",
                                    "each station's record in the stations sheet's db column, and --as-of DATE "
                                    "(a fleet is not planned with calibrated factors yet)"), "The command line")
    fleet = load_fleet(args.workbook)
    for s in fleet.stations:
        text = describe_warnings(s.scenario.warnings)
        if text:
            print(f"[{s.station}] {text}", file=sys.stderr)
    if args.as_of:
        from ..fleet.record import plan_fleet_from_records

        result = plan_fleet_from_records(fleet, args.as_of, settings, horizon_days=args.horizon_days,
                                         user=args.user, progress=True)
        fleet = result.fleet
    else:
        result = plan_fleet(fleet, settings, progress=True)
    summary = fleet_summary(result)
    with staged_output(args.out) as tmp:
        write_fleet(result.runs, summary, fleet_frames(result), tmp)
    cur = summary["currency"]
    print(f"Fleet '{fleet.name}': {len(fleet.stations)} stations, planned in groups "
          + "; ".join("+".join(g) for g in result.groups))
    print(f"  status {summary['status']}, gap {summary['gap']}, {summary['solve_seconds']:.1f} s")
    print(f"  total cost {summary['total_cost']:,.0f} {cur} against the hand split's "
          f"{summary['baseline_total_cost']:,.0f} {cur} (saving "
          f"{summary['baseline_total_cost'] - summary['total_cost']:,.0f})")
    print("  saving by cause: " + ", ".join(f"{k} {v:,.0f}" for k, v in summary["saving_by_cause"].items()))
    for name, st in summary["stations"].items():
        print(f"  {name:<12} {st['total_cost']:>14,.0f} (hand split {st['baseline_total_cost']:,.0f}), "
              f"{len(st['breaches'])} breach(es)")
    rows = room_went(result)
    if rows:
        print("Where the pooled room went (tonnes over the horizon: plan / hand split):")
        for r in rows:
            print(f"  {r['contract']:<20} {r['station']:<12} {r['tonnes']:>10,.0f} / {r['hand_split_tonnes']:,.0f}")
    for name, v in summary["shared_train_sets"].items():
        print(f"  train set {name}: at most {v['most_in_window']} of {v['max_trains']} trains in any "
              f"{v['window_days']} days ({v['trains']} trains)")
    for b in summary["breaches"]:
        print(f"  breach: {b.get('station', 'fleet')}: {b['store']} {b['first_date']}..{b['last_date']}: {b['cause']}")
    print(f"\nWrote {', '.join(sorted(result.runs))}/, fleet_summary.json, fleet.xlsx to {args.out}")
    print(f"\nCaution: {CAUTION}")
    return EXIT_BREACH if summary["breaches"] else EXIT_OK


def study(args, settings) -> int:
    from ..fleet.study import NO_PLAN, build_fleet_grid, pick_fleet_winner, run_fleet_study
    from ..output import staged_output
    from ..output.fleet import write_fleet_study

    grid = build_fleet_grid(args.workbook, args.vary, max_cases=args.max_cases)
    print(f"{len(grid.cases)} case(s) of the fleet '{grid.base.name}' ({len(grid.base.stations)} stations), "
          f"{settings.futures} futures per station (same seed in every case)")
    study = run_fleet_study(grid, settings, cluster=args.cluster, workers=args.workers,
                            case_timeout=args.case_timeout)
    frame = study.frame
    winner = pick_fleet_winner(frame, settings.risk_level)
    with staged_output(args.out) as tmp:
        write_fleet_study(frame, winner, tmp)
    cols = ["case", *[s.target for s in grid.specs], "total_cost", "baseline_total_cost", "breaches"]
    print(frame[[c for c in cols if c in frame]].to_string(index=False))
    if winner is None:
        print("No case keeps every limit within the risk level.")
    else:
        label = next(c for c in grid.cases if c.case == winner).label(grid.specs)
        print(f"Winner: case {winner} ({label})")
    for _, r in frame[frame["status"].isin(NO_PLAN)].iterrows():
        print(f"  case {int(r['case'])}: {r['status']}: {r['message']}")
    print(f"\nWrote study.csv, study.xlsx to {args.out}")
    print(f"\nCaution: {CAUTION}")
    if study.run.interrupted:
        return study_interrupted()
    return EXIT_BREACH if frame["status"].isin(NO_PLAN).any() else EXIT_OK
