"""The command line: the only place that parses argv and prints.

Every error a user can cause arrives here as a :class:`~verirun.errors.VerirunError` and leaves
as one clear line and an exit code; anything else is a bug, reported as such without a
traceback (set ``VERIRUN_DEBUG=1`` to see it).
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path

from verirun import __version__

EXIT_OK, EXIT_ERROR, EXIT_ABORTED, EXIT_BENCH, EXIT_UNSAFE, EXIT_BUSY, EXIT_BUG = (
    0,
    1,
    2,
    3,
    4,
    5,
    70,
)


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="verirun",
        description="Verify electrical meters against a programmable calibrator, from a"
        " declarative procedure to an HTML certificate.",
    )
    parser.add_argument("--version", action="version", version=f"verirun {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    demo = sub.add_parser(
        "demo", help="run the demo procedure on the simulated bench, with a virtual meter"
    )
    _output_options(demo)

    run = sub.add_parser(
        "run", help="run a procedure on a bench (real, or simulated with --simulate)"
    )
    run.add_argument("procedure", type=Path, help="the procedure file (YAML)")
    run.add_argument("--bench", type=Path, required=True, help="the bench file (YAML)")
    run.add_argument(
        "--lab",
        type=Path,
        help="the lab profile (YAML); needed at a real bench (the demo lab serves"
        " only dry runs on the simulated calibrator)",
    )
    run.add_argument(
        "--simulate",
        action="store_true",
        help="drive the simulated calibrator instead of the bench's instrument (a dry run)",
    )
    _reading_options(run)
    run.add_argument("--serial", required=True, help="serial number of the item under test")
    run.add_argument("--asset", help="the customer's asset number of the item")
    run.add_argument(
        "--condition",
        help="condition of the item on receipt, in your words (asked at the console"
        " if not given; needed at a real bench)",
    )
    run.add_argument(
        "--received",
        help="date the item was received (YYYY-MM-DD, not after the calibration;"
        " not recorded if not given)",
    )
    run.add_argument(
        "--temperature",
        help="laboratory temperature at the start, in °C (asked at the console if not given)",
    )
    run.add_argument(
        "--humidity",
        help="relative humidity at the start, in %% (asked at the console if not given)",
    )
    run.add_argument(
        "--as-left-of",
        type=Path,
        metavar="RUN",
        help="this run is the as-left pass after an adjustment; RUN is the as-found run",
    )
    run.add_argument("--adjustment", default="", help="with --as-left-of: what was adjusted")
    run.add_argument("--customer", required=True, help="customer's name")
    run.add_argument(
        "--customer-address", action="append", default=[], help="a line of the customer's address"
    )
    run.add_argument(
        "--operator", default=os.environ.get("USER", "operator"), help="who runs the verification"
    )
    _output_options(run)

    check = sub.add_parser(
        "check",
        help="check procedure, bench, driver-profile, lab, virtual-meter and"
        " readings files; every problem of every file in one pass",
    )
    check.add_argument(
        "files",
        type=Path,
        nargs="+",
        help="files to check (YAML, recognised by their keys; readings files end in .csv)",
    )
    check.add_argument(
        "--bench",
        type=Path,
        help="also check each procedure on this bench, without opening the"
        " instrument (coverage, limits, hazards, test currents, TUR)",
    )

    review = sub.add_parser(
        "review",
        help="print the plan of a procedure on a bench and write it as an HTML"
        " page for sign-off before the first real run",
    )
    review.add_argument("procedure", type=Path, help="the procedure file (YAML)")
    review.add_argument("--bench", type=Path, required=True, help="the bench file (YAML)")
    review.add_argument(
        "--reports", type=Path, default=Path("reports"), help="folder for the review page"
    )

    window = sub.add_parser("window", help="compute the allowable window of one accuracy statement")
    window.add_argument(
        "--scale", choices=["linear", "series-ohms", "shunt-ohms"], default="linear"
    )
    window.add_argument(
        "--full-scale", help="full-scale value of a linear scale (e.g. 10, 10V, 50mA)"
    )
    window.add_argument("--centre", help="centre-scale value of an ohms scale (e.g. 16, 16kohm)")
    window.add_argument("--arc", help="arc span of the scale in degrees (e.g. 100)")
    spec = window.add_mutually_exclusive_group(required=True)
    spec.add_argument("--percent-fs", type=float, metavar="PCT", help="± percent of full scale")
    spec.add_argument("--degrees", type=float, metavar="DEG", help="± degrees of arc")
    spec.add_argument(
        "--percent-length", type=float, metavar="PCT", help="± percent of scale length"
    )
    spec.add_argument("--percent-reading", type=float, metavar="PCT", help="± percent of reading")
    window.add_argument("--at", required=True, help="the nominal value (e.g. 5, 5V, 16ohm)")
    window.add_argument(
        "--u-applied", help="standard uncertainty of the applied value (e.g. 0.0004, 40uV)"
    )
    window.add_argument(
        "--resolution", help="the reading resolution (e.g. 0.05V; 0.5deg along the arc)"
    )
    window.add_argument(
        "--rule",
        choices=["simple", "guarded", "non-binary", "risk"],
        default="simple",
        help="decision rule (guarded: w = U; risk: false-accept risk at most 2 %%)",
    )
    window.add_argument("--reading", help="a reading to decide on (e.g. 5.07, 5.07V)")
    window.add_argument(
        "--monte-carlo",
        action="store_true",
        help="validate the uncertainty by Monte Carlo (JCGM 101) and print both results",
    )
    window.add_argument(
        "--seed", type=int, default=1, help="seed of the Monte Carlo trials (default 1)"
    )
    window.add_argument("--json", action="store_true", help="print a JSON object")

    resume = sub.add_parser(
        "resume", help="continue a stopped or interrupted run where it left off"
    )
    resume.add_argument("run", type=Path, help="the run folder")
    resume.add_argument(
        "--procedure", type=Path, help="the procedure file (default: the one the run started from)"
    )
    resume.add_argument(
        "--bench", type=Path, help="the bench file (default: the one the run started from)"
    )
    _reading_options(resume)
    resume.add_argument("--serial", help="serial number of the item (checked against the run's)")
    resume.add_argument(
        "--reports",
        type=Path,
        help="folder for certificates (default: the one the run started with)",
    )
    resume.add_argument(
        "--temperature",
        help="laboratory temperature now, in °C (asked at the console if not given)",
    )
    resume.add_argument(
        "--humidity", help="relative humidity now, in %% (asked at the console if not given)"
    )

    amend = sub.add_parser(
        "amend", help="correct one reading of a stored run, as a new revision that keeps the old"
    )
    amend.add_argument("run", type=Path, help="the run folder")
    amend.add_argument(
        "--point",
        required=True,
        help="the step to correct: its number (7, step 7) or its label (dca-50u@10uA)",
    )
    amend.add_argument(
        "--reading", required=True, help="the reading as it should have been recorded"
    )
    amend.add_argument("--reason", required=True, help="why (printed on the certificate)")
    amend.add_argument(
        "--operator", default=os.environ.get("USER", "operator"), help="who makes the correction"
    )
    amend.add_argument(
        "--reports",
        type=Path,
        help="folder for certificates (default: the one the run started with)",
    )

    issue = sub.add_parser(
        "issue",
        help=(
            "issue a run's certificate after review: records who authorised it, when and in"
            " which role"
        ),
    )
    issue.add_argument("run", type=Path, help="the run folder")
    issue.add_argument(
        "--by", required=True, help="who issues it, by name as the lab profile lists them"
    )
    issue.add_argument(
        "--lab",
        type=Path,
        help="the lab profile whose people may issue (default: the lab the run was made under)",
    )
    issue.add_argument(
        "--reports",
        type=Path,
        help="folder for certificates (default: the one the run started with, where its draft is)",
    )
    issue.add_argument(
        "--pdf",
        action="store_true",
        help="write a PDF beside the HTML certificate (needs WeasyPrint)",
    )

    verify = sub.add_parser(
        "verify", help="check that stored runs are as recorded (journal chain and record)"
    )
    verify.add_argument("runs", type=Path, nargs="+", help="run folders")
    verify.add_argument(
        "--reports",
        type=Path,
        default=Path("reports"),
        help="folder of certificates, checked against the runs' journals (if it exists)",
    )

    certify = sub.add_parser("certify", help="render certificates again from stored run records")
    certify.add_argument(
        "runs",
        type=Path,
        nargs="+",
        help="run folders, record.json files, or folders of run folders",
    )
    certify.add_argument(
        "--reports", type=Path, default=Path("reports"), help="folder for certificates"
    )
    certify.add_argument(
        "--pdf",
        action="store_true",
        help="write a PDF beside each HTML certificate (needs WeasyPrint)",
    )
    certify.add_argument(
        "--workers", type=int, help="processes to render with (default: one per core)"
    )

    runs = sub.add_parser("runs", help="list stored runs")
    runs.add_argument("--runs", type=Path, default=Path("runs"), help="folder of run folders")
    runs.add_argument("--item", help="only runs of this item serial (exact)")
    runs.add_argument("--since", help="only runs started on or after this date (YYYY-MM-DD)")
    runs.add_argument("--until", help="only runs started on or before this date (YYYY-MM-DD)")
    runs.add_argument("--json", action="store_true", help="print a JSON list")
    from verirun.register.commands import add_parsers

    add_parsers(sub)
    return parser


def _reading_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--show-window",
        action="store_true",
        help="show each point's allowed window at the prompt (off: knowing it can bias a reading)",
    )
    source = parser.add_mutually_exclusive_group()
    source.add_argument(
        "--readings", type=Path, help="take readings from a CSV file (range, at, reading)"
    )
    source.add_argument(
        "--virtual-meter", type=Path, help="take readings from a virtual meter file"
    )


def _reading_source(args):
    """The operator at the console, or the file the options name."""
    from verirun.console import Console
    from verirun.readings import ScriptedReadings, VirtualMeter

    if args.readings:
        return ScriptedReadings(args.readings)
    if args.virtual_meter:
        return VirtualMeter(args.virtual_meter)
    return Console(show_window=args.show_window)


def _consoles(readings):
    """The rich console to print on, and what the engine shows the operator through."""
    from verirun.console import QuietConsole

    if readings.interactive:
        return readings.rich, readings
    rich = _rich()
    return rich, QuietConsole(echo=rich)


def _output_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--runs", type=Path, default=Path("runs"), help="folder for run journals and records"
    )
    parser.add_argument(
        "--reports", type=Path, default=Path("reports"), help="folder for certificates"
    )


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit code."""
    parser = _parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_OK
    problem = _unsafe_option(args)
    if problem is not None:
        _err(f"error: {problem}")
        return EXIT_ERROR
    from verirun.errors import RunAborted, SafetyError, VerirunError
    from verirun.register import config

    config.use(getattr(args, "register", None))
    try:
        return _COMMANDS[args.command](args)
    except SafetyError as exc:
        _err(f"DANGER: {exc}")
        return EXIT_UNSAFE
    except RunAborted as exc:
        _err(f"stopped: {exc}")
        _resume_hint(exc)
        return EXIT_ABORTED
    except VerirunError as exc:
        _err(f"error: {exc}")
        _resume_hint(exc)
        return exc.exit_code
    except KeyboardInterrupt as exc:
        _err("stopped: interrupted; the output was put in standby and read back off")
        _resume_hint(exc)
        return EXIT_ABORTED
    except OSError as exc:  # a file verirun could not write or read: a fault of the bench
        from verirun.storage import what_to_do

        _err(f"error: {what_to_do(exc, getattr(exc, 'filename', None) or '')}")
        _resume_hint(exc)
        return EXIT_BENCH
    except Exception as exc:  # a bug; never a traceback for the user
        if os.environ.get("VERIRUN_DEBUG"):
            raise
        _err(f"internal error (a bug in verirun, please report it): {type(exc).__name__}: {exc}")
        return EXIT_BUG


def _unsafe_option(args) -> str | None:
    """The first option whose text holds a control or bidirectional-control character, in words."""
    from verirun.text import refusal

    for dest, value in vars(args).items():
        for text in value if isinstance(value, list) else [value]:
            if isinstance(text, str) and (why := refusal(text)) is not None:
                return f"--{dest.replace('_', '-')}: {why}"
    return None


def _err(text: str) -> None:
    from verirun.interrupts import deferred_signals

    # Mostly said while a run is stopping: a second Ctrl-C now must not become a traceback.
    with deferred_signals():
        print(text, file=sys.stderr)


def _resume_hint(exc: BaseException) -> None:
    from verirun.interrupts import deferred_signals
    from verirun.record.journal import JOURNAL_NAME, read_journal

    run_dir = getattr(exc, "run_dir", None)
    if run_dir is None:
        return
    try:
        start = read_journal(Path(run_dir) / JOURNAL_NAME).start
    except Exception:  # unreadable: resume would say why; no promise is made here
        return
    if start is None:
        return
    fix = (
        "once that is fixed, "
        if type(exc).__name__ == "StorageError" or isinstance(exc, OSError)
        else ""
    )
    with deferred_signals():  # said while the run stops, like _err
        _err(
            f"every confirmed reading is kept in {run_dir};"
            f" {fix}continue with: verirun resume {run_dir}"
        )


def _cmd_check(args) -> int:
    from verirun.checkfiles import check

    report = check(args.files, bench_path=args.bench)
    for line in report.lines:
        print(line)
    return EXIT_ERROR if report.failed else EXIT_OK


def _cmd_review(args) -> int:
    import datetime as dt

    from rich.table import Table
    from rich.text import Text

    from verirun.bench.config import load_bench
    from verirun.bench.profile import load_profile
    from verirun.certificate.render import safe_file_name
    from verirun.procedure.load import load_procedure
    from verirun.review import COLUMNS, render_html, review

    procedure = load_procedure(args.procedure)
    bench = load_bench(args.bench)
    found = review(
        procedure, bench, load_profile(bench.file.calibrator.profile), today=dt.date.today()
    )
    rich = _rich(wide=True)
    table = Table(title=Text(f"{found.procedure} on bench {found.bench}"))
    for _, title in COLUMNS:
        table.add_column(title, overflow="fold")
    for row in found.rows:
        style = "red" if row.tur_low or row.current_over else None
        # Cells as plain text: a procedure's words are never read as markup.
        table.add_row(*(Text(str(getattr(row, name))) for name, _ in COLUMNS), style=style)
    rich.print(table)
    for text in found.problems:
        rich.print(f"problem: {text}", markup=False)
    for text in found.warnings:
        rich.print(f"warning: {text}", markup=False)
    from verirun import storage

    storage.make_folder(args.reports)
    out = args.reports / safe_file_name(
        f"review-{procedure.id}-{procedure.revision}-{bench.file.bench.id}.html"
    )
    storage.write_atomic(out, [render_html(found)])  # whole, and never through a link
    rich.print(f"Review page: {out}", markup=False)
    return EXIT_ERROR if found.problems else EXIT_OK


def _rich(*, wide: bool = False):
    """A rich console for output. Without a terminal nothing is wrapped or cut, for scripts: lines
    are printed whole and, with ``wide``, tables as wide as their contents."""
    from rich.console import Console as RichConsole

    if sys.stdout.isatty():
        return RichConsole(highlight=False)
    return RichConsole(highlight=False, soft_wrap=True, **({"width": 10_000} if wide else {}))


def _cmd_window(args) -> int:
    from verirun.errors import UnitError
    from verirun.evaluation import Site, evaluate, shown
    from verirun.metrology import decision, scales, tolerance, uncertainty
    from verirun.units import parse_quantity

    def quantity(name: str, text, expect=None):
        try:
            return parse_quantity(text, expect)
        except UnitError as exc:
            raise UnitError(f"--{name}: {exc}") from None

    ohms = args.scale != "linear"
    at, unit = quantity("at", args.at, "Ω" if ohms else None)
    if ohms:
        if args.centre is None:
            raise UnitError(
                f"--centre: required for a {args.scale} scale: give the value marked at the"
                " middle of the scale, e.g. --centre 12ohm"
            )
        centre, _ = quantity("centre", args.centre, "Ω")
        if centre <= 0:
            raise UnitError("--centre: must be more than zero")
        law = scales.make_law(args.scale, centre=centre)
        full_scale = None
    else:
        if args.full_scale is None:
            raise UnitError(
                "--full-scale: required for a linear scale: give the value at the right end"
                " of the scale, e.g. --full-scale 10V"
            )
        full_scale, fs_unit = quantity("full-scale", args.full_scale, unit or None)
        unit = unit or fs_unit
        if full_scale <= 0:
            raise UnitError("--full-scale: must be more than zero")
        law = scales.Linear(high=full_scale)
    arc = quantity("arc", args.arc, "deg")[0] if args.arc is not None else None
    try:
        if args.percent_fs is not None:
            statement = tolerance.PercentOfFullScale(percent=args.percent_fs)
        elif args.degrees is not None:
            statement = tolerance.DegreesOfArc(degrees=args.degrees)
        elif args.percent_length is not None:
            statement = tolerance.PercentOfLength(percent=args.percent_length)
        else:
            statement = tolerance.ValueStatement(reading=args.percent_reading)
        win = tolerance.window(
            statement, at, tolerance.RangeContext(law=law, arc=arc, full_scale=full_scale)
        )
        terms = []
        if args.u_applied is not None:
            u_applied = quantity("u-applied", args.u_applied, unit or None)[0]
            terms.append(
                uncertainty.Term(
                    name="applied value",
                    standard_uncertainty=u_applied,
                    domain="value",
                    distribution="normal",
                )
            )
        if args.resolution is not None:
            terms.append(_window_resolution(args.resolution, unit, arc, ohms, quantity))
        budget = uncertainty.budget(terms=terms, nominal=at, law=law, domain=win.domain)
        rule = decision.rule_from_name(args.rule)
        typed = args.reading
        reading = quantity("reading", typed, unit or None)[0] if typed is not None else None
        site = Site(window=win, law=law, unit=unit, budget=budget, rule=rule)
        result = evaluate(site, reading if reading is not None else at)
        validation = (
            budget.validate(law, per_unit=float(win.per_unit), seed=args.seed)
            if args.monte_carlo and budget.combined > 0
            else None
        )
    except ValueError as exc:
        raise UnitError(str(exc)) from None
    if args.monte_carlo and validation is None:
        raise UnitError(
            "--monte-carlo: give --u-applied or --resolution: there is no uncertainty to validate"
        )
    texts = shown(site, result, typed)
    out = _window_document(win, unit, budget, rule, result, texts, reading, validation)
    if args.json:
        print(json.dumps(out, ensure_ascii=False))
        return EXIT_OK
    for line in _window_lines(win, rule, result, texts, reading, terms, validation):
        print(line)
    return EXIT_OK


def _window_resolution(text: str, unit: str, arc, ohms: bool, quantity):
    """The readability term of ``--resolution``: in the range's unit on a linear scale; along
    the arc (degrees, or % of scale length) on an ohms scale, whose divisions are not evenly
    spaced in ohms."""
    from verirun.errors import UnitError
    from verirun.metrology import uncertainty

    text = text.strip()
    if text.endswith(("deg", "°")):
        if not arc:
            raise UnitError("--resolution: a resolution in degrees needs --arc")
        return uncertainty.readability_term(
            division=quantity("resolution", text, "deg")[0], unit="degrees", arc=arc
        )
    if text.endswith("%"):
        return uncertainty.readability_term(
            division=quantity("resolution", text, "%")[0] / 100.0, unit="length"
        )
    if ohms:
        raise UnitError(
            "--resolution: on an ohms scale give the resolution along the arc, in degrees"
            " (0.5deg) or percent of scale length (0.5%): its divisions are not evenly"
            " spaced in ohms"
        )
    return uncertainty.readability_term(division=quantity("resolution", text, unit or None)[0])


def _window_document(win, unit, budget, rule, result, texts, reading, validation) -> dict:
    """The JSON object of ``verirun window``: every number, and each as the certificate prints
    it."""
    from verirun.record.journal import json_number

    accept = result.acceptance
    out = {
        "nominal": win.nominal,
        "low": json_number(win.low),
        "high": json_number(win.high),
        "unit": unit,
        "domain": win.domain,
        "half_width": win.half_width,
        "U": result.expanded if result.expanded > 0 else 0.0,
        "U_unit": result.error_unit,
        "U_domain": budget.expanded,
        "k": budget.k,
        "U_linear_value": json_number(budget.expanded_value),
        "tur": json_number(result.tur),
        "rule": rule.name,
        "accept_low": json_number(accept[0]) if accept else None,
        "accept_high": json_number(accept[1]) if accept else None,
        "interval_low": json_number(result.interval[0]) if result.interval else None,
        "interval_high": json_number(result.interval[1]) if result.interval else None,
        "text": dict(texts),
    }
    if reading is not None:
        out["reading"] = reading
        out["verdict"] = result.verdict
        out["pc"] = result.conformance
    if validation is not None:
        out["monte_carlo"] = _validation_document(validation)
    return out


def _validation_document(v) -> dict:
    def comparison(c):
        return (
            None
            if c is None
            else {
                "gum_low": c.gum_low,
                "gum_high": c.gum_high,
                "mc_low": _finite_or_none(c.mc_low),
                "mc_high": _finite_or_none(c.mc_high),
                "d_low": _finite_or_none(c.d_low),
                "d_high": _finite_or_none(c.d_high),
                "tolerance": c.tolerance,
                "validated": c.validated,
            }
        )

    return {
        "seed": v.seed,
        "trials": v.trials,
        "batches": v.batches,
        "converged": v.converged,
        "probability": v.probability,
        "ndig": v.ndig,
        "u": v.mc_u,
        "along": comparison(v.along),
        "in_value": comparison(v.in_value),
    }


def _finite_or_none(x: float) -> float | None:
    import math

    return x if math.isfinite(x) else None


def _window_lines(win, rule, result, texts, reading, terms, validation) -> list[str]:
    """The words of ``verirun window``."""
    from verirun.metrology.summary import label

    lines = [
        f"at {texts['nominal']}: {texts['low']} to {texts['high']}"
        + (" (unbounded above)" if not win.bounded else "")
    ]
    if terms:
        tur_text = f"{result.tur:.2f}" if result.tur is not None else "none (unbounded)"
        lines.append(f"U (k = {result.k:g}) = {texts['U_spec']}; TUR {tur_text}")
        if win.domain == "deflection" and texts["interval"]:
            lines.append(
                f"interval in {texts['unit']} ({'reading' if reading is not None else 'nominal'}"
                f" ± U along the arc, through the scale law): {texts['interval']}"
            )
    if rule.name != "simple":
        lines.append(
            "acceptance: "
            + (
                f"{texts['accept_low']} to {texts['accept_high']}"
                if texts["accept_low"] is not None
                else "none (the uncertainty leaves no acceptance zone)"
            )
        )
    if texts.get("outer_low") is not None:
        lines.append(
            f"conditional fail down to {texts['outer_low']} and up to {texts['outer_high']}"
        )
    if reading is not None:
        lines.append(
            f"reading {texts['reading']}: {label(result.verdict)}"
            f" (conformance probability {result.conformance:.4f})"
        )
    if validation is not None:
        lines += _validation_lines(validation, win, texts)
    return lines


def _validation_lines(v, win, texts) -> list[str]:
    def interval(c, unit: str) -> str:
        def num(x: float) -> str:
            return "∞" if x == float("inf") else f"{x:.6g}"

        def q(x: float) -> str:
            return f"{num(x)}{unit}" if unit == "°" else f"{num(x)} {unit}"

        return (
            f"GUM {q(c.gum_low)} to {q(c.gum_high)}; Monte Carlo {q(c.mc_low)} to"
            f" {q(c.mc_high)}; d_low {num(c.d_low)}, d_high {num(c.d_high)},"
            f" tolerance {c.tolerance:.2g}: {'VALIDATED' if c.validated else 'NOT VALIDATED'}"
        )

    unit = "°" if win.unit == "deg" else (win.unit or texts["unit"])
    lines = [
        f"Monte Carlo (JCGM 101:2008 7.9, 8.2): {v.trials} trials in {v.batches} batches"
        f"{'' if v.converged else ' (did not reach its tolerance)'}, seed {v.seed},"
        f" coverage probability {100 * v.probability:.2f} %",
        f"  in the tolerance's domain: {interval(v.along, unit)}",
    ]
    if v.in_value is not None:
        base = texts["unit"][-1:] if texts["unit"].endswith("Ω") else texts["unit"]
        lines.append(f"  linear U carried into {base} at the nominal: {interval(v.in_value, base)}")
        lines.append(
            "  the linear result in the range's unit is "
            + (
                "validated"
                if v.in_value.validated
                else "NOT validated: use the interval along the arc mapped through the scale law"
            )
        )
    return lines


def _cmd_amend(args) -> int:
    from verirun.adjustment import revise_as_left
    from verirun.certificate.render import write_certificate
    from verirun.issue import earlier_revisions, earlier_states, state_of
    from verirun.record.amend import amend

    record = amend(
        args.run, point=args.point, reading=args.reading, reason=args.reason, operator=args.operator
    )
    from verirun.register.closing import waiting

    reports = args.reports or _reports_of(args.run)
    out = write_certificate(record, reports)
    earlier, replaced = earlier_revisions(args.run)[-1]
    kept = write_certificate(
        earlier,
        reports,
        replaced_by=replaced,
        earlier=earlier_states(args.run, earlier, replaced_by=replaced),
    )
    print(f"{args.run}: revision {record.run.revision} ({state_of(record)}); certificate {out}")
    print(f"  the certificate it replaces stays readable, marked as replaced: {kept}")
    for folder, left in revise_as_left(args.run, reason=args.reason, operator=args.operator):
        combined = write_certificate(left, args.reports or _reports_of(folder))
        print(
            f"{folder}: the as-left run's combined certificate takes the corrected as-found"
            " results:"
            f" revision {left.run.revision} ({state_of(left)}); certificate {combined}"
        )
    if waiting(args.run):
        _err(
            "the register could not take this revision; it waits in the run's outbox for"
            " 'verirun register sync'"
        )
    return EXIT_OK


def _cmd_issue(args) -> int:
    from verirun.certificate.render import write_certificate, write_pdf
    from verirun.issue import earlier_states, issue, state_of
    from verirun.register.closing import after_close, waiting

    lab = None
    if args.lab is not None:
        from verirun.lab import load_lab

        lab = load_lab(args.lab).lab.model_dump(mode="json")
    record = issue(args.run, by=args.by, lab=lab)
    record, _ = after_close(
        Path(args.run), record, warn=_err
    )  # the issued record to the register too
    out = write_certificate(
        record, args.reports or _reports_of(args.run), earlier=earlier_states(args.run, record)
    )
    print(f"{args.run}: {state_of(record)}; certificate {out}")
    if args.pdf:
        print(f"  and {write_pdf(out.read_text(encoding='utf-8'), out.with_suffix('.pdf'))}")
    if waiting(args.run):
        _err(
            "the register could not take the issued record; it waits in the run's outbox for"
            " 'verirun register sync'"
        )
    return EXIT_OK


def _cmd_verify(args) -> int:
    from verirun.record.verify import problems

    failed = 0
    for path in args.runs:
        found = problems(path, reports=args.reports)
        if found:
            failed += 1
            for line in found:
                print(line)
            print(f"{path}: DOES NOT VERIFY ({len(found)} problem{'s' if len(found) > 1 else ''})")
        else:
            print(f"{path}: verified; {_state(path)}")
    return EXIT_ERROR if failed else EXIT_OK


def _cmd_resume(args) -> int:
    from verirun.conduct import resumable, resume

    readings = _reading_source(args)
    rich, console = _consoles(readings)
    held = resumable(args.run)
    rich.print(held.text(), markup=False)
    reports = args.reports or held.reports or Path("reports")
    rich.print(f"Certificate folder: {reports}", markup=False)
    environment = None
    to_measure = held.kept < held.points  # else the run is only closed: nothing to ask
    if (
        args.temperature is not None
        or args.humidity is not None
        or (readings.interactive and to_measure)
    ):
        # The conditions now, not as they were when the run stopped.
        environment = _environment(args.temperature, args.humidity, readings)
        if not readings.interactive:
            environment = {**held.environment, **environment}
    finished = resume(
        run_dir=args.run,
        procedure_path=args.procedure,
        bench_path=args.bench,
        readings=readings,
        console=console,
        reports_dir=reports,
        serial=args.serial,
        environment=environment,
    )
    _summary(rich, finished)
    return EXIT_OK


def _reports_of(run: Path) -> Path:
    """The certificate folder the run at ``run`` started with (``reports`` for older runs)."""
    from verirun.record.journal import JOURNAL_NAME, read_journal
    from verirun.record.verify import run_folder

    start = read_journal(run_folder(run) / JOURNAL_NAME).start
    return Path((start.reports if start is not None else None) or "reports")


def _state(path) -> str:
    from verirun.issue import state_of
    from verirun.record.journal import load_record

    return state_of(load_record(path))


def _summary(rich, finished) -> None:
    from rich.text import Text

    from verirun.issue import state_of
    from verirun.record.build import record_judged

    # Paths are printed as they are (a folder may be named "[x]"), never read as markup.
    rich.print(Text(f"\nRun record:  {finished.record_path}"))
    if finished.certificate is not None:
        rich.print(Text(f"Certificate: {finished.certificate} ({state_of(finished.record)})"))
        if not finished.record.bench.simulated:
            rich.print(
                Text(f"Review the draft, then issue it: verirun issue {finished.run_dir} --by NAME")
            )
    from verirun.console import verdict_text
    from verirun.metrology.summary import summarise

    record = finished.record
    counted = summarise(record_judged(record), record.decision_rule.rule)
    rich.print(
        Text.assemble(
            "Overall: ",
            verdict_text(counted.overall),
            f" ({counted.counts_text()}, {counted.skipped} skipped of {counted.points} points)",
        )
    )
    if counted.guard_band_rejections:
        rich.print(
            Text(
                f"Rejected by the guard band alone (within tolerance):"
                f" {', '.join(counted.guard_band_rejections)}"
            )
        )


def _cmd_certify(args) -> int:
    from rich.console import Console as RichConsole
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    from verirun.certificate.batch import certify_many, find_runs
    from verirun.register.closing import withheld

    runs = find_runs(args.runs)
    if not runs:
        _err("error: no stored runs found there")
        return EXIT_ERROR
    waiting = [reason for reason in map(withheld, runs) if reason]
    if waiting:
        for reason in waiting:
            _err(f"error: {reason}")
        return EXIT_ERROR
    if args.pdf:
        from verirun.certificate.render import pdf_engine

        pdf_engine()  # before the batch, so a missing extra is said once, not once per run
    rich = RichConsole(highlight=False, stderr=True)
    columns = (TextColumn("certifying"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn())
    with Progress(*columns, console=rich, transient=True, disable=len(runs) < 2) as progress:
        task = progress.add_task("certify", total=len(runs))
        outcomes = certify_many(
            runs,
            args.reports,
            pdf=args.pdf,
            workers=args.workers,
            progress=lambda _: progress.advance(task),
        )
    failed = [o for o in outcomes if o.error]
    for outcome in outcomes:
        if outcome.certificate:
            extra = f" and {outcome.pdf}" if outcome.pdf else ""
            print(
                f"{outcome.run}: certificate {outcome.certificate}{extra} ({outcome.state})"
                + (f" ({outcome.note})" if outcome.note else "")
            )
            for earlier in outcome.replaced:
                print(f"  and {earlier}, the revision it replaces, marked as replaced")
    for outcome in failed:
        _err(f"error: {outcome.error}")
    rendered = len(outcomes) - len(failed)
    print(f"{rendered} certificate{'s' if rendered != 1 else ''} rendered, {len(failed)} failed")
    return EXIT_ERROR if failed else EXIT_OK


def _cmd_runs(args) -> int:
    from verirun.record.listing import list_runs
    from verirun.register.commands import runs_source

    source, where = runs_source(args.runs)  # the register, when one is named
    rows = (source or list_runs)(
        args.runs,
        item=args.item,
        since=_date(args.since, "--since"),
        until=_date(args.until, "--until"),
    )
    for row in rows:
        if row.get("status") == "unreadable":
            _err(f"skipped {row['path']}: {row['problem']}")
    rows = [row for row in rows if row.get("status") != "unreadable"]
    if args.json:
        print(json.dumps(rows, ensure_ascii=False, indent=1))
        return EXIT_OK
    from rich.table import Table
    from rich.text import Text

    table = Table(title=Text(f"Runs in {where}") if rows else None)
    # The run folder is what other commands take: never cut, however narrow the terminal.
    table.add_column("run", no_wrap=True, min_width=max((len(r["run"]) for r in rows), default=3))
    for name in (
        "item",
        "procedure",
        "date",
        "verdict",
        "status",
        "certificate",
        "customer",
        "bench",
        "rev",
        "as-found / as-left",
    ):
        table.add_column(name, overflow="fold")
    for row in rows:
        link = (
            f"as-left of {row['as_found_run']}"
            if row.get("as_found_run")
            else f"as-found; as-left {row['as_left_run']}"
            if row.get("as_left_run")
            else ""
        )
        bench = "" if row.get("simulated") is None else "simulated" if row["simulated"] else "real"
        cells = (
            row["run"],
            row["item"] or "",
            f"{row['procedure']} rev {row['revision']}",
            row["date"],
            row["verdict"],
            row["status"],
            _certificate_cell(row),
            row.get("customer") or "",
            bench,
            str(row.get("record_revision") or ""),
            link,
        )
        table.add_row(*(Text(cell) for cell in cells))  # stored text is never read as markup
    console = _rich(wide=True)
    # Width the table needs with no cell folded: each column's widest cell, a space either side
    # and a border between.
    needed = sum(max([len(c.header), *(len(v) for v in c.cells)]) + 3 for c in table.columns) + 1
    if rows and needed <= console.width:
        console.print(table)
    elif rows:
        # Narrower than the table: one block per run, the run folder on a line of its own
        # (the terminal may fold a long one, but nothing is cut off).
        for row in rows:
            bench = (
                "" if row.get("simulated") is None else "simulated" if row["simulated"] else "real"
            )
            link = (
                f"as-left of {row['as_found_run']}"
                if row.get("as_found_run")
                else f"as-found; as-left {row['as_left_run']}"
                if row.get("as_left_run")
                else ""
            )
            fields = [
                row["item"] or "",
                f"{row['procedure']} rev {row['revision']}",
                row["date"],
                row["verdict"],
                row["status"],
                _certificate_cell(row),
                row.get("customer") or "",
                bench,
                f"revision {row.get('record_revision') or ''}",
                link,
            ]
            console.print(row["run"], markup=False, soft_wrap=True)
            console.print("  " + " · ".join(f for f in fields if f), markup=False, soft_wrap=True)
    else:
        console.print(
            f"no runs in {where}" + (" match" if args.item or args.since or args.until else ""),
            markup=False,
        )
    return EXIT_OK


def _today() -> str:
    """Today's date in UTC (the demo's item is received on the day of its run)."""
    import datetime as dt

    return dt.datetime.now(dt.timezone.utc).date().isoformat()


def _certificate_cell(row: dict) -> str:
    """A run's certificate number with its state: ``KFM-... (draft)``, ``(issued)``,
    ``(dry run)``."""
    number, state = row.get("certificate") or "", row.get("certificate_state")
    return f"{number} ({state})" if number and state else number


def _date(text: str | None, option: str) -> str | None:
    import datetime as dt

    from verirun.errors import UnitError

    if text is None:
        return None
    try:
        return dt.date.fromisoformat(text.strip()).isoformat()
    except ValueError:
        raise UnitError(f"{option}: {text!r} is not a date; write it as YYYY-MM-DD") from None


def _environment(temperature: str | None, humidity: str | None, readings) -> dict:
    """The conditions at the start: from the options, else asked of the operator at the console."""
    from verirun.conditions import ask_conditions, parse_humidity, parse_temperature

    env = {}
    if temperature is not None:
        env["temperature_c"] = parse_temperature(temperature, "--temperature")
    if humidity is not None:
        env["humidity_pct"] = parse_humidity(humidity, "--humidity")
    if readings.interactive and ("temperature_c" not in env or "humidity_pct" not in env):
        env = {**ask_conditions(readings, have=env), **env}
    return env


def _run(
    args,
    *,
    procedure_path,
    bench_path,
    lab_path,
    readings,
    simulate,
    context_item,
    customer,
    operator,
    environment=None,
    as_left_of=None,
    adjustment="",
    condition=None,
    demo_lab=False,
) -> int:
    from verirun.bench.sim import is_simulator
    from verirun.conduct import execute
    from verirun.console import Console
    from verirun.engine import RunContext
    from verirun.errors import VerirunError
    from verirun.lab import load_lab
    from verirun.procedure.load import load_procedure
    from verirun.register.standards import load_bench

    procedure = load_procedure(procedure_path)
    bench = load_bench(bench_path)
    lab = load_lab(lab_path)
    # A bench whose VISA library is the simulator is a dry run, however it was started.
    simulate = simulate or is_simulator(bench.file.calibrator.visa_library)
    if demo_lab and not simulate:
        raise VerirunError(
            "a run at a real bench needs the lab's profile (--lab FILE): the demo lab serves"
            " only the demo and dry runs on the simulated calibrator (--simulate)"
        )
    if callable(condition):
        context_item = {**context_item, "condition": condition(simulate)}
    if callable(environment):
        environment = environment()
    rich, console = _consoles(readings)
    as_found = None
    if as_left_of is not None:
        from verirun.conduct import as_found_of

        as_found = as_found_of(
            as_left_of,
            serial=context_item["serial"],
            procedure=procedure,
            adjustment=adjustment,
            customer=customer,
            others=[args.runs],
            simulated=simulate,
        )
    context = RunContext(
        lab=lab.lab.model_dump(mode="json"),
        customer=customer,
        item=context_item,
        operator=operator,
        simulated=simulate,
        environment=environment or {},
        as_found=as_found,
    )
    if simulate:
        rich.print("[bold]Dry run on the simulated calibrator[/] (no real instrument is driven).")
    if not readings.interactive:
        Console(rich).cautions()
    finished = execute(
        procedure=procedure,
        bench=bench,
        context=context,
        readings=readings,
        console=console,
        runs_dir=args.runs,
        reports_dir=args.reports,
        simulate=simulate,
    )
    _summary(rich, finished)
    return EXIT_OK


def _cmd_demo(args) -> int:
    from verirun.conduct import demo_files
    from verirun.readings import VirtualMeter

    with demo_files() as demo:
        return _run(
            args,
            procedure_path=demo["procedure"],
            bench_path=demo["bench"],
            lab_path=demo["lab"],
            readings=VirtualMeter(demo["meter"]),
            simulate=True,
            context_item={
                "serial": "QM40-118273",
                "asset": "AWB-E-0457",
                "received": _today(),
                "condition": "Case scuffed; no damage affecting use. Battery 1.5 V fitted.",
            },
            customer={
                "name": "Ashgrove Water Board",
                "address": ["Pumping Station 3", "Ashgrove AG2 7LP"],
            },
            operator="demo technician",
            environment={"temperature_c": 23.1, "humidity_pct": 41.0},
        )


def _cmd_run(args) -> int:
    from verirun.conduct import demo_files
    from verirun.receipt import ask_condition, check_received

    readings = _reading_source(args)
    item = {
        "serial": args.serial,
        "asset": args.asset,
        "condition": None,
        "received": check_received(_date(args.received, "--received")),
    }
    # Asked for (when not given) once the files have loaded and it is known whether the run is
    # at a real bench, which needs it.
    condition = lambda simulated: ask_condition(args.condition, readings, needed=not simulated)  # noqa: E731
    # Asked for only once the files have loaded: a typo in them is reported before any question.
    environment = lambda: _environment(args.temperature, args.humidity, readings)  # noqa: E731
    customer = {"name": args.customer, "address": args.customer_address}
    if args.lab is None:
        with demo_files() as demo:
            return _run(
                args,
                procedure_path=args.procedure,
                bench_path=args.bench,
                lab_path=demo["lab"],
                readings=readings,
                simulate=args.simulate,
                context_item=item,
                customer=customer,
                operator=args.operator,
                environment=environment,
                as_left_of=args.as_left_of,
                adjustment=args.adjustment,
                condition=condition,
                demo_lab=True,
            )
    return _run(
        args,
        procedure_path=args.procedure,
        bench_path=args.bench,
        lab_path=args.lab,
        readings=readings,
        simulate=args.simulate,
        context_item=item,
        customer=customer,
        operator=args.operator,
        environment=environment,
        as_left_of=args.as_left_of,
        adjustment=args.adjustment,
        condition=condition,
    )


_COMMANDS = {
    "issue": _cmd_issue,
    "check": _cmd_check,
    "review": _cmd_review,
    "window": _cmd_window,
    "certify": _cmd_certify,
    "demo": _cmd_demo,
    "run": _cmd_run,
    "resume": _cmd_resume,
    "verify": _cmd_verify,
    "amend": _cmd_amend,
    "runs": _cmd_runs,
}

from verirun.register.commands import COMMANDS as _REGISTER_COMMANDS  # noqa: E402  (the register's own)

_COMMANDS.update(_REGISTER_COMMANDS)
