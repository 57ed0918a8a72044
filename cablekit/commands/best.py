"""``cablekit best results/ [--write best.toml]``: the Pareto front of a sweep and its best design."""

from __future__ import annotations

from pathlib import Path

from ..cli import EXIT_OK, InputError

NAME = "best"
HELP = "list the Pareto front of a sweep's results and write the chosen design file"
DESCRIPTION = ("Reads OUT/results.parquet of 'cablekit sweep', lists the variants on the Pareto front (valid, "
               "meeting every constraint, not dominated in the objectives) and, with --write, writes the chosen "
               "one as a design file with a [sweep] section saying how it was chosen (the review sheet prints it). "
               "The chosen variant is the front's best in --by (default: the first objective) unless --variant "
               "names one.")


def add_arguments(p) -> None:
    p.add_argument("results", metavar="FOLDER", help="a results folder written by 'cablekit sweep'")
    p.add_argument("--write", metavar="DESIGN.toml", help="write the chosen design here")
    p.add_argument("--by", metavar="METRIC", help="choose the front's best in this metric (default: first objective)")
    p.add_argument("--variant", type=int, metavar="N", help="write variant N instead")
    p.add_argument("--write-front", metavar="FOLDER", help="write every design of the Pareto front there "
                                                            "(variant-N.toml), each to review")
    p.add_argument("--top", type=int, default=15, metavar="N", help="rows of the front to list (default 15)")


def run(args) -> int:
    from ..design import DesignError
    from ..sweep import METRICS, SweepError, choose_best, load_results, metric_display, spec_of_results
    from ..sweep import write_variant_design

    if args.write and Path(args.write).suffix != ".toml":
        raise InputError(f"--write: a design file name ending in .toml, got {args.write!r}")
    try:
        table, meta = load_results(args.results)
        row, rule = choose_best(table, meta, by=args.by, variant=args.variant)
    except SweepError as exc:
        raise InputError(str(exc)) from None
    front = table[table["pareto"]]
    objs = list(meta["objectives"])
    params = [c for c in table.columns if c.startswith("param:")]
    print(f"sweep {meta['sweep_file']}: {len(table)} variants, {int(table['valid'].sum())} valid, "
          f"{int(table['meets_constraints'].sum())} meet every constraint, {len(front)} on the Pareto front")
    head = ["variant"] + [c[6:] for c in params] + objs
    print("  " + "  ".join(f"{h:>14}" for h in head))
    for _, r in front.sort_values(objs).head(args.top).iterrows():
        units = [meta["parameters"][c[6:]]["unit"] for c in params]
        cells = [f"{int(r['variant'])}"] + [f"{r[c]:.4g} {u}".strip() if isinstance(r[c], float) else str(r[c])
                                            for c, u in zip(params, units)]
        cells += [metric_display(m, float(r[m])) for m in objs]
        print("  " + "  ".join(f"{c:>14}" for c in cells))
    print(f"chosen: variant {int(row['variant'])}: {rule}")
    for m in METRICS:
        print(f"  {m:<20} {metric_display(m, float(row[m])):>12}   {METRICS[m].title}")
    if args.write_front and not Path(args.write_front).is_dir():
        raise InputError(f"--write-front: {args.write_front!r} is not an existing folder")
    try:
        spec = spec_of_results(args.results) if (args.write or args.write_front) else None
        if args.write:
            out = write_variant_design(spec, table, meta, row, args.write, rule=rule)
            print(f"wrote {out}; review it in full: cablekit review {out} -o review.html")
        if args.write_front:
            for _, r in front.iterrows():
                v = int(r["variant"])
                write_variant_design(spec, table, meta, r, Path(args.write_front) / f"variant-{v}.toml",
                                     rule=f"variant {v} of the Pareto front of {len(front)} variants")
            print(f"wrote the {len(front)} designs of the Pareto front to {args.write_front} (variant-N.toml)")
    except (SweepError, DesignError) as exc:
        raise InputError(str(exc)) from None
    print(f"  {meta['caution']}")
    return EXIT_OK
