"""``cablekit review DESIGN.toml -o review.html [--pdf review.pdf]``: the design-review sheet."""

from __future__ import annotations

import sys
from pathlib import Path

from ..cli import EXIT_CHECK_FAILED, EXIT_OK, InputError, output_path
from ..design import load_design

NAME = "review"
HELP = "write the design-review sheet (HTML, optionally PDF) with every check, plot and caution"
DESCRIPTION = ("Builds the design-review sheet of a design file: scenario and job, inputs with units, derived "
               "quantities, every check with its value, limit, margin and source, plots, equations, assumptions, "
               "what was not checked, safety cautions and a sign-off block. The HTML works offline. "
               "Exit 0 when every check passes, 4 when any check fails (the sheet is still written and shows the "
               "failure), 3 for a missing or invalid design file (nothing is written).")


def add_arguments(p) -> None:
    p.add_argument("design", metavar="DESIGN.toml")
    p.add_argument("-o", "--output", metavar="REVIEW.html", default="review.html",
                   help="where to write the HTML sheet (default: review.html)")
    p.add_argument("--pdf", metavar="REVIEW.pdf", help="also print the sheet to PDF (needs a headless Chromium)")
    p.add_argument("--date", metavar="YYYY-MM-DD", help="the date printed on the sheet (default: today)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress messages")


def _check_date(text: str | None) -> str | None:
    import datetime

    if text is None:
        return None
    try:
        return datetime.date.fromisoformat(text).isoformat()
    except ValueError:
        raise InputError(f"--date: expected a date like 2025-03-31, got {text!r}") from None


def run(args) -> int:
    from ..review import RendererError, check_line, find_browser, write_review

    date = _check_date(args.date)
    if Path(args.output).suffix.lower() not in (".html", ".htm"):
        raise InputError(f"-o/--output: the sheet is HTML; give a file name ending in .html, got {args.output!r}")
    out = output_path(args.output, "-o/--output", inputs=[args.design], create_folder=True)
    pdf = output_path(args.pdf, "--pdf", inputs=[args.design, out], suffixes=(".pdf",), create_folder=True)
    design = load_design(args.design)  # DesignError -> exit 3 with the list of problems; nothing written
    if args.pdf:
        try:
            find_browser()
        except RendererError as exc:
            raise InputError(f"--pdf: {exc}") from None

    def progress(msg: str) -> None:
        if not args.quiet:
            print(f"  {msg} ...", file=sys.stderr, flush=True)

    try:
        sheet = write_review(design, out, pdf=pdf, source_path=args.design, date=date, progress=progress)
    except RendererError as exc:
        raise InputError(f"--pdf: {exc} (the HTML sheet was written to {out})") from None
    n = len(sheet.checks)
    fails, warns = sheet.failures, sheet.warnings
    print(f"wrote {out}" + (f" and {args.pdf}" if args.pdf else ""))
    print(f"{design.meta.name}: {n} checks, {n - len(fails) - len(warns)} pass, {len(warns)} warn, {len(fails)} fail")
    for c in fails:
        print(f"  {check_line(c)}")
    if sheet.missing:
        print("  not checked (module not installed): " + ", ".join(sheet.missing))
    return EXIT_CHECK_FAILED if fails else EXIT_OK
