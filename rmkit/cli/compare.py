"""``rmkit compare``: every method on one scenario, value by value against the optimum."""

from __future__ import annotations

import argparse
from typing import Any

from rmkit.cli._common import add_json, add_scenario, emit_json, load
from rmkit.cli._options import add_csv, add_param, add_quiet, add_run_defaults, method_settings
from rmkit.cli._report import CAUTION, Table

#: Library fields this command fills from options (see rmkit.cli.option_message).
OPTIONS = {"methods": "--methods", "settings": "--param", "visit_paths": "--visit-paths"}
HELP = "run methods on a scenario: bounds, bid prices, simulated revenue, errors vs the optimum"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    add_compare_options(parser)
    add_outputs(parser)
    add_json(parser)


def add_compare_options(parser: argparse.ArgumentParser) -> None:
    """Options shared with ``rmkit demo``."""
    from rmkit.workflows.compare import DEFAULT_VISIT_PATHS

    parser.add_argument("--methods", default=None,
                        help="comma-separated method names (default: every method; those that "
                        "cannot run are listed with the reason); see 'rmkit methods'")
    add_run_defaults(parser)
    parser.add_argument("--visit-paths", type=int, default=None, metavar="N",
                        help="paths that estimate where the optimal policy goes (default "
                        f"{DEFAULT_VISIT_PATHS}, at most --paths)")
    add_param(parser, one_method=False)
    add_csv(parser)
    add_quiet(parser)


def add_outputs(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--out", default=None, help="write the comparison to FILE.nc (NetCDF)")
    parser.add_argument("--plot", default=None, help="draw the figure to FILE.png")


def run_comparison(scenario: Any, args: argparse.Namespace, command: str = "compare"):
    """Run :func:`rmkit.workflows.compare.compare` with the command's options.

    Returns the Dataset and the run settings in force."""
    from rmkit.cli._progress import progress_bar
    from rmkit.workflows.compare import DEFAULT_VISIT_PATHS, compare, select_methods
    from rmkit.workflows.defaults import run_settings

    run = run_settings(scenario, paths=args.paths, resolve=args.resolve, seed=args.seed)
    names = select_methods(args.methods)
    settings = method_settings(args.param, names)
    visit_paths = args.visit_paths if args.visit_paths is not None else DEFAULT_VISIT_PATHS
    with progress_bar(command, args) as progress:
        ds = compare(scenario.network, scenario.demand, methods=names, paths=run.paths,
                     resolve=run.resolve, seed=run.seed, visit_paths=visit_paths,
                     scenario=scenario.name, settings=settings, progress=progress)
    ds.attrs["defaults_from"] = run.header()
    return ds, run


def check_outputs(args: argparse.Namespace) -> None:
    from rmkit.cli._report import check_table_target
    from rmkit.files import NETCDF_SUFFIXES, check_output

    if args.out is not None:
        check_output(args.out, "--out", NETCDF_SUFFIXES)
    if getattr(args, "plot", None) is not None:
        check_output(args.plot, "--plot", (".png",))
    check_table_target(args.csv)


def write_outputs(ds, scenario, out: str | None, plot: str | None) -> None:
    from rmkit.cli._common import write_netcdf
    from rmkit.cli._report import stamp
    from rmkit.files import write_atomically

    if out:
        stamp(ds, scenario)
        write_netcdf(ds, out)
    if plot:
        from rmkit.workflows.plots import comparison_figure

        write_atomically(plot, lambda tmp: comparison_figure(ds, tmp), "--plot")


def report(ds, out: str | None, plot: str | None, scenario=None,
           tables: list[str] | None = None) -> dict[str, Any]:
    """The JSON object of a comparison."""
    from rmkit.cli._report import provenance_json
    from rmkit.workflows.ranking import ranked

    attrs = ds.attrs
    return {
        "scenario": attrs["scenario"],
        "seed": attrs["seed"],
        "paths": attrs["paths"],
        "resolve": attrs["resolve"],
        "defaults_from": attrs.get("defaults_from", ""),
        "reference": {"kind": attrs["reference_kind"], "method": attrs["reference_method"],
                      "value": attrs["reference_value"],
                      "stderr": attrs.get("reference_stderr", 0.0),
                      "gap_pairing": attrs.get("gap_pairing", "")},
        "best_policy": attrs["best_policy"],
        "errors": attrs["errors"],
        "methods": ranked(ds),
        "out": out,
        "plot": plot,
        "csv": tables or [],
        "provenance": provenance_json(scenario) if scenario is not None else None,
    }


def _pm(mean: float | None, low: float | None, high: float | None, spec: str = ",.1f") -> str:
    if mean is None:
        return "-"
    if low is None or high is None:
        return format(mean, spec)
    return f"{format(mean, spec)} ± {format((high - low) / 2, spec.lstrip('+'))}"


def ranking_table(ds) -> tuple[Table, list[str]]:
    """The ranked table (CSV columns and the printed cells) and notes on skipped methods."""
    from rmkit.methods.base import ASSUMES_INDEPENDENT
    from rmkit.workflows.ranking import ranked

    attrs = ds.attrs
    ref_kind = attrs["reference_kind"]
    best = attrs["best_policy"]
    columns = ["rank", "method", "kind", "status", "revenue", "revenue 95% low",
               "revenue 95% high", f"difference vs {best or 'best'}", "difference 95% low",
               "difference 95% high", "difference significant", "gap % (estimate)",
               "gap % 95% low", "gap % 95% high", "gap % std. error", "optimum or upper bound",
               "optimum or bound std. error", "bid-price error mean", "bid-price error max",
               "solve seconds", "simulate seconds", "demand assumption"]
    gap_head = "gap to optimum % (est.)" if ref_kind == "optimum" else "gap to best bound % (est.)"
    shown_columns = ["rank", "method", "kind", "revenue ± 95%", f"vs {best or 'best'} (paired)",
                     gap_head, "bid-price error mean / max", "optimum or bound", "seconds"]
    rows, shown, notes = [], [], []
    for r in ranked(ds):
        kind = {"upper bound": "bound"}.get(r["kind"], r["kind"])
        optimum = r["kind"] == "optimum"
        rows.append([r["rank"], r["method"], r["kind"], r["status"], r["revenue_mean"],
                     r["revenue_ci_low"], r["revenue_ci_high"], r["difference_mean"],
                     r["difference_ci_low"], r["difference_ci_high"], r["difference_significant"],
                     None if optimum else r["gap_percent"],
                     None if optimum else r["gap_percent_ci_low"],
                     None if optimum else r["gap_percent_ci_high"],
                     None if optimum else r["gap_percent_stderr"],
                     None if r["kind"] == "heuristic" else r["value"], r["value_stderr"],
                     r["bid_price_error_mean"], r["bid_price_error_max"], r["solve_seconds"],
                     r["simulate_seconds"], r["label"]])
        if r["label"]:
            kind = f"{kind}; {ASSUMES_INDEPENDENT}"
        if r["status"] != "ran":
            shown.append(["-", r["method"], r["status"], *["-"] * 6])
            notes.append(f"{r['method']} {r['status']}: {r['reason']}")
            continue
        if r["method"] == best:
            diff = "best"
        elif r["difference_mean"] is None:
            diff = "-"
        else:
            diff = _pm(r["difference_mean"], r["difference_ci_low"], r["difference_ci_high"],
                       "+,.1f") + (" *" if r["difference_significant"] else "  ")
        if optimum:
            gap = "the optimum"
        else:
            gap = _pm(r["gap_percent"], r["gap_percent_ci_low"], r["gap_percent_ci_high"], ".2f")
        err = ("-" if r["bid_price_error_mean"] is None else
               f"{r['bid_price_error_mean']:.2f} / {r['bid_price_error_max']:.1f}")
        value = "-"
        if r["kind"] != "heuristic" and r["value"] is not None:
            value = ("DP " if optimum else "≤ ") + f"{r['value']:,.1f}"
            if r["value_stderr"] is not None:
                value += f" ± {1.96 * r['value_stderr']:.1f}"
        seconds = sum(v for v in (r["solve_seconds"], r["simulate_seconds"]) if v is not None)
        shown.append(["-" if r["rank"] is None else str(r["rank"]), r["method"], kind,
                      _pm(r["revenue_mean"], r["revenue_ci_low"], r["revenue_ci_high"]),
                      diff, gap, err, value, f"{seconds:.2f}"])
    title = f"{attrs['scenario']}: {attrs.get('defaults_from') or _plain_header(attrs)}"
    table = Table("ranking", title, columns, rows, shown_columns=shown_columns, shown=shown)
    return table, notes


def _plain_header(attrs) -> str:
    return f"{attrs['paths']:,} paths, {attrs['resolve']} re-solves, seed {attrs['seed']}"


def bid_price_table(ds) -> Table:
    """Each method's leg bid prices at the start of the horizon (method x leg)."""
    legs = [str(v) for v in ds.leg.values]
    rows = []
    for q, name in enumerate(ds.method.values.tolist()):
        d = ds.isel(method=q)
        if str(d["status"].values) != "ran":
            continue
        values = [float(v) for v in d["bid_price"].values]
        if all(v != v for v in values):  # NaN: a bound without bid prices
            continue
        rows.append([name, *values])
    return Table("bid_prices", "bid prices at the start of the horizon (currency per seat)",
                 ["method", *legs], rows, formats=[None, *[",.2f"] * len(legs)])


def comparison_notes(ds, notes: list[str]) -> list[str]:
    from rmkit.workflows.ranking import ranked

    attrs = ds.attrs
    ref = attrs["reference_kind"]
    best = attrs["best_policy"]
    out = list(notes)
    viewed = [r for r in ranked(ds) if r["label"]]
    if viewed:
        names = ", ".join(f"{r['method']} ({r['assumes_independent_demand']})" for r in viewed)
        out.append(f"assumes independent demand: {names}: run through the ':independent' view, "
                   "which solves an independent-demand approximation of this scenario's demand; "
                   "simulated against the scenario's own customers, and their values are no "
                   "bounds")
    if best:
        out.append(f"vs {best}: each policy's revenue minus {best}'s on the same request streams "
                   "(paired, 95% interval); * = the interval excludes 0, a real difference")
    if ref == "optimum":
        out.append(f"gap % (est.): 100 (optimum - simulated revenue) / optimum, with the optimum "
                   f"the exact DP value {attrs['reference_value']:,.2f} ({attrs['reference_method']})"
                   "; a simulated estimate, so the interval can reach below 0")
    elif ref != "none":
        se = float(attrs.get("reference_stderr", 0.0) or 0.0)
        value = f"{attrs['reference_value']:,.2f}" + (f" ± {se:,.2f} SE" if se > 0 else "")
        pairing = attrs.get("gap_pairing", "")
        how = {"deterministic bound": "the interval is the policy's sampling error alone",
               "independent": "the interval combines the policy's and the bound's standard "
                              "errors, sqrt(se_policy^2 + se_bound^2)"}.get(
            pairing, f"the interval combines the policy's and the bound's sampling errors, "
                     f"{pairing} (their covariance taken out)" if pairing else "")
        out.append(f"gap % (est.): certified gap to the best upper bound "
                   f"({attrs['reference_method']}, {value}); the true gap to the optimum is "
                   f"smaller" + (f"; {how}" if how else ""))
    if attrs["errors"]:
        out.append(f"bid-price error (currency per seat): {attrs['errors']}")
    compiled = sum(r["compile_seconds"] or 0.0 for r in ranked(ds))
    if compiled > 0.5:
        out.append(f"kernel compilation (once per install) took {compiled:.1f} s, kept out of "
                   "the seconds")
    for r in ranked(ds):
        if r["check"] not in ("", "ok"):
            out.append(f"CHECK FAILED for {r['method']}: {r['check']}")
        if r["warning"]:
            out.append(f"{r['method']}: {r['warning']} (all in the NetCDF attr 'warnings')")
    return out


def comparison_tables(ds) -> tuple[list[Table], list[str]]:
    ranking, notes = ranking_table(ds)
    return [ranking, bid_price_table(ds)], comparison_notes(ds, notes)


def print_report(ds, tables: list[Table], notes: list[str], written: dict[str, Any]) -> None:
    from rmkit.cli._report import print_tables

    lines = list(notes)
    for label, target in written.items():
        if target:
            lines.append(f"{label} written to {target}")
    lines.append(CAUTION)
    print_tables(tables, lines)


def run(args: argparse.Namespace) -> int:
    from rmkit.cli._report import warnings_summarised, write_tables

    check_outputs(args)  # before any work: a bad output path never wastes a comparison
    scenario = load(args.scenario)
    with warnings_summarised("compare"):
        ds, _ = run_comparison(scenario, args)
    write_outputs(ds, scenario, args.out, args.plot)
    tables, notes = comparison_tables(ds)
    written = [str(p) for p in write_tables(tables, args.csv)]
    if args.json:
        emit_json(report(ds, args.out, args.plot, scenario, written))
    else:
        print_report(ds, tables, notes, {"NetCDF": args.out, "figure": args.plot,
                                         "tables": ", ".join(written)})
    return 0
