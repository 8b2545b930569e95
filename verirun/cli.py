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

EXIT_OK, EXIT_ERROR, EXIT_ABORTED, EXIT_BENCH, EXIT_UNSAFE, EXIT_BUG = 0, 1, 2, 3, 4, 70


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="verirun",
        description="Verify electrical meters against a programmable calibrator, from a"
                    " declarative procedure to an HTML certificate.")
    parser.add_argument("--version", action="version", version=f"verirun {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    demo = sub.add_parser("demo", help="run the demo procedure on the simulated bench, with a virtual meter")
    _output_options(demo)

    run = sub.add_parser("run", help="run a procedure on a bench (real, or simulated with --simulate)")
    run.add_argument("procedure", type=Path, help="the procedure file (YAML)")
    run.add_argument("--bench", type=Path, required=True, help="the bench file (YAML)")
    run.add_argument("--lab", type=Path, help="the lab profile (YAML); default: the demo lab")
    run.add_argument("--simulate", action="store_true",
                     help="drive the simulated calibrator instead of the bench's instrument (a dry run)")
    _reading_options(run)
    run.add_argument("--serial", required=True, help="serial number of the item under test")
    run.add_argument("--asset", help="the customer's asset number of the item")
    run.add_argument("--condition", default="No damage or defect seen on receipt.",
                     help="condition of the item as received")
    run.add_argument("--received", help="date the item was received (YYYY-MM-DD; default: the run's date)")
    run.add_argument("--temperature", help="laboratory temperature at the start, in °C (asked at the console if not given)")
    run.add_argument("--humidity", help="relative humidity at the start, in %% (asked at the console if not given)")
    run.add_argument("--as-left-of", type=Path, metavar="RUN",
                     help="this run is the as-left pass after an adjustment; RUN is the as-found run")
    run.add_argument("--adjustment", default="", help="with --as-left-of: what was adjusted")
    run.add_argument("--customer", required=True, help="customer's name")
    run.add_argument("--customer-address", action="append", default=[], help="a line of the customer's address")
    run.add_argument("--operator", default=os.environ.get("USER", "operator"), help="who runs the verification")
    _output_options(run)

    check = sub.add_parser("check", help="check procedure, bench, driver-profile, lab, virtual-meter and"
                                         " readings files; every problem of every file in one pass")
    check.add_argument("files", type=Path, nargs="+",
                       help="files to check (YAML, recognised by their keys; readings files end in .csv)")
    check.add_argument("--bench", type=Path, help="also check each procedure on this bench, without opening the"
                                                  " instrument (coverage, limits, hazards, test currents, TUR)")

    review = sub.add_parser("review", help="print the plan of a procedure on a bench and write it as an HTML"
                                           " page for sign-off before the first real run")
    review.add_argument("procedure", type=Path, help="the procedure file (YAML)")
    review.add_argument("--bench", type=Path, required=True, help="the bench file (YAML)")
    review.add_argument("--reports", type=Path, default=Path("reports"), help="folder for the review page")

    window = sub.add_parser("window", help="compute the allowable window of one accuracy statement")
    window.add_argument("--scale", choices=["linear", "series-ohms", "shunt-ohms"], default="linear")
    window.add_argument("--full-scale", help="full-scale value of a linear scale (e.g. 10, 10V, 50mA)")
    window.add_argument("--centre", help="centre-scale value of an ohms scale (e.g. 16, 16kohm)")
    window.add_argument("--arc", help="arc span of the scale in degrees (e.g. 100)")
    spec = window.add_mutually_exclusive_group(required=True)
    spec.add_argument("--percent-fs", type=float, metavar="PCT", help="± percent of full scale")
    spec.add_argument("--degrees", type=float, metavar="DEG", help="± degrees of arc")
    spec.add_argument("--percent-length", type=float, metavar="PCT", help="± percent of scale length")
    spec.add_argument("--percent-reading", type=float, metavar="PCT", help="± percent of reading")
    window.add_argument("--at", required=True, help="the nominal value (e.g. 5, 5V, 16ohm)")
    window.add_argument("--u-applied", help="standard uncertainty of the applied value (e.g. 0.0004, 40uV)")
    window.add_argument("--resolution", help="the reading resolution (e.g. 0.05V; 0.5deg along the arc)")
    window.add_argument("--rule", choices=["simple", "guarded", "non-binary", "risk"], default="simple",
                        help="decision rule (guarded: w = U; risk: false-accept risk at most 2 %%)")
    window.add_argument("--reading", help="a reading to decide on (e.g. 5.07, 5.07V)")
    window.add_argument("--json", action="store_true", help="print a JSON object")

    resume = sub.add_parser("resume", help="continue a stopped or interrupted run where it left off")
    resume.add_argument("run", type=Path, help="the run folder")
    resume.add_argument("--procedure", type=Path, help="the procedure file (default: the one the run started from)")
    resume.add_argument("--bench", type=Path, help="the bench file (default: the one the run started from)")
    _reading_options(resume)
    resume.add_argument("--serial", help="serial number of the item (checked against the run's)")
    resume.add_argument("--reports", type=Path, help="folder for certificates (default: the one the run started with)")
    resume.add_argument("--temperature", help="laboratory temperature now, in °C (asked at the console if not given)")
    resume.add_argument("--humidity", help="relative humidity now, in %% (asked at the console if not given)")

    amend = sub.add_parser("amend", help="correct one reading of a stored run, as a new revision that keeps the old")
    amend.add_argument("run", type=Path, help="the run folder")
    amend.add_argument("--point", required=True, help="the step number or point key to correct")
    amend.add_argument("--reading", required=True, help="the reading as it should have been recorded")
    amend.add_argument("--reason", required=True, help="why (printed on the certificate)")
    amend.add_argument("--operator", default=os.environ.get("USER", "operator"), help="who makes the correction")
    amend.add_argument("--reports", type=Path, default=Path("reports"), help="folder for certificates")

    verify = sub.add_parser("verify", help="check that stored runs are as recorded (journal chain and record)")
    verify.add_argument("runs", type=Path, nargs="+", help="run folders")

    certify = sub.add_parser("certify", help="render certificates again from stored run records")
    certify.add_argument("runs", type=Path, nargs="+",
                         help="run folders, record.json files, or folders of run folders")
    certify.add_argument("--reports", type=Path, default=Path("reports"), help="folder for certificates")
    certify.add_argument("--pdf", action="store_true", help="write a PDF beside each HTML certificate (needs WeasyPrint)")
    certify.add_argument("--workers", type=int, help="processes to render with (default: one per core)")

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
    parser.add_argument("--show-window", action="store_true",
                        help="show each point's allowed window at the prompt (off: knowing it can bias a reading)")
    source = parser.add_mutually_exclusive_group()
    source.add_argument("--readings", type=Path, help="take readings from a CSV file (range, at, reading)")
    source.add_argument("--virtual-meter", type=Path, help="take readings from a virtual meter file")


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
    parser.add_argument("--runs", type=Path, default=Path("runs"), help="folder for run journals and records")
    parser.add_argument("--reports", type=Path, default=Path("reports"), help="folder for certificates")


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit code."""
    parser = _parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_OK
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
    except Exception as exc:  # a bug; never a traceback for the user
        if os.environ.get("VERIRUN_DEBUG"):
            raise
        _err(f"internal error (a bug in verirun, please report it): {type(exc).__name__}: {exc}")
        return EXIT_BUG


def _err(text: str) -> None:
    print(text, file=sys.stderr)


def _resume_hint(exc: BaseException) -> None:
    run_dir = getattr(exc, "run_dir", None)
    if run_dir is not None and (Path(run_dir) / "journal.jsonl").exists():
        _err(f"every confirmed reading is kept in {run_dir}; continue with: verirun resume {run_dir}")


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
    found = review(procedure, bench, load_profile(bench.file.calibrator.profile), today=dt.date.today())
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
    args.reports.mkdir(parents=True, exist_ok=True)
    out = args.reports / safe_file_name(f"review-{procedure.id}-{procedure.revision}-{bench.file.bench.id}.html")
    out.write_text(render_html(found), encoding="utf-8")
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
    from verirun.metrology import decision, scales, tolerance, uncertainty
    from verirun.record import json_number
    from verirun.units import format_quantity, parse_quantity

    def quantity(name: str, text, expect=None):
        try:
            return parse_quantity(text, expect)
        except UnitError as exc:
            raise UnitError(f"--{name}: {exc}") from None

    ohms = args.scale != "linear"
    at, unit = quantity("at", args.at, "Ω" if ohms else None)
    if ohms:
        if args.centre is None:
            raise UnitError(f"--centre: required for a {args.scale} scale: give the value marked at the"
                            " middle of the scale, e.g. --centre 12ohm")
        centre, _ = quantity("centre", args.centre, "Ω")
        if centre <= 0:
            raise UnitError("--centre: must be more than zero")
        law = scales.make_law(args.scale, centre=centre)
        full_scale = None
    else:
        if args.full_scale is None:
            raise UnitError("--full-scale: required for a linear scale: give the value at the right end"
                            " of the scale, e.g. --full-scale 10V")
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
        win = tolerance.window(statement, at, tolerance.RangeContext(law=law, arc=arc, full_scale=full_scale))
        terms = []
        if args.u_applied is not None:
            u_applied = quantity("u-applied", args.u_applied, unit or None)[0]
            terms.append(uncertainty.Term(name="applied value", standard_uncertainty=u_applied,
                                          domain="value", distribution="normal"))
        if args.resolution is not None:
            text = args.resolution.strip()
            in_degrees = text.endswith(("deg", "°"))
            res = quantity("resolution", text, "deg" if in_degrees else (unit or None))[0]
            if in_degrees and not arc:
                raise UnitError("--resolution: a resolution in degrees needs --arc")
            terms.append(uncertainty.readability_term(division=res, unit="degrees" if in_degrees else "value",
                                                      arc=arc))
        budget = uncertainty.budget(terms=terms, nominal=at, law=law, domain=win.domain)
        rule = decision.rule_from_name(args.rule)
        reading = quantity("reading", args.reading, unit or None)[0] if args.reading is not None else None
        judged = decision.judge(rule, window=win, law=law, budget=budget,
                                reading=reading if reading is not None else at)
    except ValueError as exc:
        raise UnitError(str(exc)) from None
    accept = judged.acceptance
    out = {"nominal": win.nominal, "low": json_number(win.low), "high": json_number(win.high),
           "unit": unit, "domain": win.domain, "half_width": win.half_width,
           "U": json_number(budget.expanded_value), "U_domain": budget.expanded, "k": budget.k,
           "tur": json_number(judged.tur), "rule": rule.name,
           "accept_low": json_number(accept[0]) if accept else None,
           "accept_high": json_number(accept[1]) if accept else None}
    if reading is not None:
        out["reading"] = reading
        out["verdict"] = judged.verdict
        if rule.name == "risk" or args.json:
            out["pc"] = judged.conformance
    if args.json:
        print(json.dumps(out))
        return EXIT_OK
    print(f"at {format_quantity(win.nominal, unit)}: {format_quantity(win.low, unit)} to"
          f" {format_quantity(win.high, unit)}" + (" (unbounded above)" if not win.bounded else ""))
    if terms:
        tur_text = f"{judged.tur:.2f}" if judged.tur is not None else "none (unbounded)"
        print(f"U (k = 2) = {format_quantity(budget.expanded_value, unit, 2)}; TUR {tur_text}")
    if rule.name != "simple":
        print("acceptance: " + (f"{format_quantity(accept[0], unit)} to {format_quantity(accept[1], unit)}"
                                if accept else "none (the uncertainty leaves no acceptance zone)"))
    if reading is not None:
        print(f"reading {format_quantity(reading, unit)}: {judged.verdict.upper()}"
              f" (conformance probability {judged.conformance:.4f})")
    return EXIT_OK


def _cmd_amend(args) -> int:
    from verirun.amend import amend
    from verirun.certificate.render import write_certificate

    record = amend(args.run, point=args.point, reading=args.reading, reason=args.reason, operator=args.operator)
    out = write_certificate(record, args.reports)
    print(f"{args.run}: revision {record['run']['revision']}; certificate {out}")
    from verirun.register.closing import waiting

    if waiting(args.run):
        _err("the register could not take this revision; it waits in the run's outbox for 'verirun register sync'")
    return EXIT_OK


def _cmd_verify(args) -> int:
    from verirun.integrity import problems

    failed = 0
    for path in args.runs:
        found = problems(path)
        if found:
            failed += 1
            for line in found:
                print(line)
            print(f"{path}: DOES NOT VERIFY ({len(found)} problem{'s' if len(found) > 1 else ''})")
        else:
            print(f"{path}: verified")
    return EXIT_ERROR if failed else EXIT_OK


def _cmd_resume(args) -> int:
    from verirun.session import resumable, resume

    readings = _reading_source(args)
    rich, console = _consoles(readings)
    held = resumable(args.run)
    rich.print(held.text(), markup=False)
    reports = args.reports or held.reports or Path("reports")
    rich.print(f"Certificate folder: {reports}", markup=False)
    environment = None
    if args.temperature is not None or args.humidity is not None or readings.interactive:
        # The conditions now, not as they were when the run stopped.
        environment = _environment(args.temperature, args.humidity, readings)
        if not readings.interactive:
            environment = {**held.environment, **environment}
    finished = resume(run_dir=args.run, procedure_path=args.procedure, bench_path=args.bench,
                      readings=readings, console=console, reports_dir=reports, serial=args.serial,
                      environment=environment)
    _summary(rich, finished)
    return EXIT_OK


def _summary(rich, finished) -> None:
    summary = finished.record["summary"]
    rich.print(f"\nRun record:  {finished.record_path}")
    if finished.certificate is not None:
        rich.print(f"Certificate: {finished.certificate}")
    verdict = summary["overall"].upper()
    colour = "green" if summary["overall"] == "pass" else "red"
    rich.print(f"Overall: [bold {colour}]{verdict}[/] ({summary['pass']} pass, {summary['fail']} fail,"
               f" {summary['skipped']} skipped of {summary['points']} points)")


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
        outcomes = certify_many(runs, args.reports, pdf=args.pdf, workers=args.workers,
                                progress=lambda _: progress.advance(task))
    failed = [o for o in outcomes if o.error]
    for outcome in outcomes:
        if outcome.certificate:
            extra = f" and {outcome.pdf}" if outcome.pdf else ""
            print(f"{outcome.run}: certificate {outcome.certificate}{extra}"
                  + (f" ({outcome.note})" if outcome.note else ""))
    for outcome in failed:
        _err(f"error: {outcome.error}")
    rendered = len(outcomes) - len(failed)
    print(f"{rendered} certificate{'s' if rendered != 1 else ''} rendered, {len(failed)} failed")
    return EXIT_ERROR if failed else EXIT_OK


def _cmd_runs(args) -> int:
    from verirun.catalogue import list_runs
    from verirun.register.commands import runs_source

    source, where = runs_source(args.runs)  # the register, when one is named
    rows = (source or list_runs)(args.runs, item=args.item, since=_date(args.since, "--since"),
                                 until=_date(args.until, "--until"))
    if args.json:
        print(json.dumps(rows, ensure_ascii=False, indent=1))
        return EXIT_OK
    from rich.table import Table
    from rich.text import Text

    table = Table(title=Text(f"Runs in {where}") if rows else None)
    # The run folder is what other commands take: never cut, however narrow the terminal.
    table.add_column("run", no_wrap=True, min_width=max((len(r["run"]) for r in rows), default=3))
    for name in ("item", "procedure", "date", "verdict", "status", "certificate", "customer", "bench",
                 "rev", "as-found / as-left"):
        table.add_column(name, overflow="fold")
    for row in rows:
        link = (f"as-left of {row['as_found_run']}" if row.get("as_found_run")
                else f"as-found; as-left {row['as_left_run']}" if row.get("as_left_run") else "")
        bench = "" if row.get("simulated") is None else "simulated" if row["simulated"] else "real"
        cells = (row["run"], row["item"] or "", f"{row['procedure']} rev {row['revision']}", row["date"],
                 row["verdict"], row["status"], row.get("certificate") or "", row.get("customer") or "",
                 bench, str(row.get("record_revision") or ""), link)
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
            bench = "" if row.get("simulated") is None else "simulated" if row["simulated"] else "real"
            link = (f"as-left of {row['as_found_run']}" if row.get("as_found_run")
                    else f"as-found; as-left {row['as_left_run']}" if row.get("as_left_run") else "")
            fields = [row["item"] or "", f"{row['procedure']} rev {row['revision']}", row["date"], row["verdict"],
                      row["status"], row.get("certificate") or "", row.get("customer") or "", bench,
                      f"revision {row.get('record_revision') or ''}", link]
            console.print(row["run"], markup=False, soft_wrap=True)
            console.print("  " + " · ".join(f for f in fields if f), markup=False, soft_wrap=True)
    else:
        console.print(f"no runs in {where}" + (" match" if args.item or args.since or args.until else ""),
                      markup=False)
    return EXIT_OK


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
    from verirun.environment import ask_conditions, parse_humidity, parse_temperature

    env = {}
    if temperature is not None:
        env["temperature_c"] = parse_temperature(temperature, "--temperature")
    if humidity is not None:
        env["humidity_pct"] = parse_humidity(humidity, "--humidity")
    if readings.interactive and ("temperature_c" not in env or "humidity_pct" not in env):
        env = {**ask_conditions(readings, have=env), **env}
    return env


def _run(args, *, procedure_path, bench_path, lab_path, readings, simulate, context_item,
         customer, operator, environment=None, as_left_of=None, adjustment="") -> int:
    from verirun.console import Console
    from verirun.engine import RunContext
    from verirun.register.standards import load_bench
    from verirun.lab import load_lab
    from verirun.procedure.load import load_procedure
    from verirun.session import execute

    procedure = load_procedure(procedure_path)
    bench = load_bench(bench_path)
    lab = load_lab(lab_path)
    if callable(environment):
        environment = environment()
    rich, console = _consoles(readings)
    as_found = None
    if as_left_of is not None:
        from verirun.session import as_found_of

        as_found = as_found_of(as_left_of, serial=context_item["serial"], procedure=procedure, adjustment=adjustment)
    context = RunContext(lab=lab.lab.model_dump(mode="json"), customer=customer, item=context_item,
                         operator=operator, simulated=simulate, environment=environment or {},
                         as_found=as_found)
    if simulate:
        rich.print("[bold]Dry run on the simulated calibrator[/] (no real instrument is driven).")
    if not readings.interactive:
        Console(rich).cautions()
    finished = execute(procedure=procedure, bench=bench, context=context, readings=readings,
                       console=console, runs_dir=args.runs, reports_dir=args.reports, simulate=simulate)
    _summary(rich, finished)
    return EXIT_OK


def _cmd_demo(args) -> int:
    from verirun.readings import VirtualMeter
    from verirun.session import demo_files

    with demo_files() as demo:
        return _run(args, procedure_path=demo["procedure"], bench_path=demo["bench"], lab_path=demo["lab"],
                    readings=VirtualMeter(demo["meter"]), simulate=True,
                    context_item={"serial": "QM40-118273", "asset": "AWB-E-0457", "received": None,
                                  "condition": "Case scuffed; no damage affecting use. Battery 1.5 V fitted."},
                    customer={"name": "Ashgrove Water Board", "address": ["Pumping Station 3", "Ashgrove AG2 7LP"]},
                    operator="demo technician", environment={"temperature_c": 23.1, "humidity_pct": 41.0})


def _cmd_run(args) -> int:
    from verirun.session import demo_files

    readings = _reading_source(args)
    item = {"serial": args.serial, "asset": args.asset, "condition": args.condition,
            "received": _date(args.received, "--received")}
    # Asked for only once the files have loaded: a typo in them is reported before any question.
    environment = lambda: _environment(args.temperature, args.humidity, readings)  # noqa: E731
    customer = {"name": args.customer, "address": args.customer_address}
    if args.lab is None:
        with demo_files() as demo:
            return _run(args, procedure_path=args.procedure, bench_path=args.bench, lab_path=demo["lab"],
                        readings=readings, simulate=args.simulate, context_item=item, customer=customer,
                        operator=args.operator, environment=environment, as_left_of=args.as_left_of,
                        adjustment=args.adjustment)
    return _run(args, procedure_path=args.procedure, bench_path=args.bench, lab_path=args.lab,
                readings=readings, simulate=args.simulate, context_item=item, customer=customer,
                operator=args.operator, environment=environment, as_left_of=args.as_left_of,
                adjustment=args.adjustment)


_COMMANDS = {"check": _cmd_check, "review": _cmd_review, "window": _cmd_window, "certify": _cmd_certify, "demo": _cmd_demo,
             "run": _cmd_run, "resume": _cmd_resume, "verify": _cmd_verify, "amend": _cmd_amend, "runs": _cmd_runs}

from verirun.register.commands import COMMANDS as _REGISTER_COMMANDS  # noqa: E402  (the register's own)

_COMMANDS.update(_REGISTER_COMMANDS)
