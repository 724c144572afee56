"""``rmkit generate``: write a generated scenario (hub and spoke, with independent demand or with
customers who choose, or a line route) as TOML."""

from __future__ import annotations

import argparse

from rmkit.cli._common import add_json, check_outputs, emit_json, print_table

HELP = ("generate a hub-and-spoke (independent or choice demand) or line scenario from a seed "
        "and write it as TOML")


def _fares(text: str) -> tuple[int, int]:
    low, sep, high = text.partition(",")
    try:
        return int(low), int(high if sep else low)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected LOW,HIGH whole numbers, got {text!r}") from None


def _common(p: argparse.ArgumentParser, periods: int, arrival: float, fares: str,
            arriving: str = "requests") -> None:
    p.add_argument("--alpha", type=float, required=True,
                   help="demand factor alpha: expected seat requests / total capacity (met exactly)")
    p.add_argument("--periods", type=int, default=periods, help=f"booking periods (default {periods})")
    p.add_argument("--arrival", type=float, default=arrival,
                   help=f"{arriving} per period before capacity is fitted (default {arrival})")
    p.add_argument("--fares", type=_fares, default=_fares(fares), metavar="LOW,HIGH",
                   help=f"range of the whole-number base fares (default {fares})")
    p.add_argument("--seed", type=int, default=0, help="generator seed (default 0)")
    p.add_argument("--out", required=True, help="scenario file to write (FILE.toml)")
    add_json(p)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    sub = parser.add_subparsers(dest="family", metavar="FAMILY", required=True)
    hub = sub.add_parser("hub-spoke", help="one hub, N spokes, two fare classes (public family)")
    hub.add_argument("--spokes", type=int, required=True, help="N: 2N legs, 2N(N+1) products")
    hub.add_argument("--kappa", type=float, default=4.0, help="expensive / cheap fare (default 4)")
    _common(hub, 200, 1.0, "20,100")
    choice = sub.add_parser(
        "hub-spoke-choice",
        help="the hub-and-spoke family with customers who choose (MNL): per market one "
        "flexible and one price-sensitive segment, so 2N(N+1) segments (40 at 4 spokes)",
        description="The hub-and-spoke network of 'hub-spoke' (same legs, products and cheap "
        "fares for the same seed) with multinomial-logit customer segments: every market "
        "(ordered pair of locations) has a price-sensitive segment (prefers the cheap product, "
        "buys up 2 in 7 times when only the expensive one is open) and a flexible one (prefers "
        "the expensive product), both considering the market's two products; price-sensitive "
        "customers are 70% of a market's arrivals in the first half of the horizon and 30% in "
        "the second. N spokes: 2N legs, 2N(N+1) products, 2N(N+1) segments. Capacities are "
        "fitted so that the seat demand with every product offered meets --alpha.")
    choice.add_argument("--spokes", type=int, required=True,
                        help="N: 2N legs, 2N(N+1) products, 2N(N+1) segments")
    choice.add_argument("--kappa", type=float, default=4.0,
                        help="expensive / cheap fare (default 4)")
    _common(choice, 200, 1.0, "20,100", arriving="customers")
    line = sub.add_parser("line", help="a bus or train line with every origin-destination product")
    line.add_argument("--legs", type=int, required=True, help="k legs, k+1 stations")
    line.add_argument("--classes", type=int, default=2, help="fare classes per pair (default 2)")
    line.add_argument("--ratio", type=float, default=2.0,
                      help="fare of the next class up / this class (default 2)")
    line.add_argument("--taper", type=float, default=0.85,
                      help="per-leg discount of longer trips, in (0, 1] (default 0.85)")
    _common(line, 100, 0.5, "20,60")


def run(args: argparse.Namespace) -> int:
    from rmkit.cli.info import summary
    from rmkit.errors import InputError
    from rmkit.model.families import generate
    from rmkit.model.scenario import save_scenario

    check_outputs(args, out=(".toml",))
    if not str(args.out).lower().endswith(".toml"):
        raise InputError(f"--out: {args.out!r} should end in .toml")
    common = {"alpha": args.alpha, "periods": args.periods, "arrival": args.arrival,
              "fares": args.fares, "seed": args.seed}
    if args.family in ("hub-spoke", "hub-spoke-choice"):
        scenario = generate(args.family, spokes=args.spokes, kappa=args.kappa, **common)
    else:
        scenario = generate("line", legs=args.legs, classes=args.classes, ratio=args.ratio,
                            taper=args.taper, **common)
    from rmkit.files import write_atomically

    write_atomically(args.out, lambda tmp: save_scenario(scenario, tmp), "--out")
    info = summary(scenario)
    if args.json:
        emit_json({**info, "out": args.out})
        return 0
    columns = ["legs", "products", "periods", "alpha", "expected requests"]
    row = [info["legs"], info["products"], info["periods"], info["alpha"],
           info["expected_requests"]]
    if "segments" in info:
        columns.append("segments")
        row.append(info["segments"])
    print_table(f"{scenario.name} written to {args.out}", columns, [row])
    return 0
