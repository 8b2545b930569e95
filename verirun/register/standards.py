"""Standards kept in the register: a bench file may name its calibrator by asset number alone.

Such a bench file gives the calibrator's asset, address, driver profile and identity, and no
certificate: the certificate, calibration due date, traceability and accuracy lines then come
from the standard's latest revision in the register. They are written into the bench text the
run embeds in its journal (after the asset line, marked by a comment naming the register), so
the record stays a function of its journal alone and an overdue standard blocks the run as it
does when the due date is typed in the bench file.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import sqlalchemy as sa

from verirun import yamlfile
from verirun.bench.config import Bench, load_bench_text
from verirun.errors import ProcedureError
from verirun.register.schema import standards

#: What the register supplies for a calibrator named by asset (bench-file key: column).
SUPPLIED = ("certificate", "calibration-due", "traceability", "accuracy")


def current_standard(register, asset: str) -> dict | None:
    """The latest revision of the standard ``asset`` (``None`` when the register has none)."""
    with register.reading() as connection:
        row = (
            connection.execute(
                sa.select(standards)
                .where(standards.c.asset == asset)
                .order_by(standards.c.revision.desc())
                .limit(1)
            )
            .mappings()
            .first()
        )
    if row is None:
        return None
    return {**row, "accuracy": json.loads(row["accuracy"])}


def enter_standard(
    register,
    *,
    bench_path: Path,
    certificate: str | None = None,
    due: dt.date | None = None,
    by: str,
) -> dict:
    """Enter the calibrator of a (complete, valid) bench file as the next revision of its standard.

    Raises
    ------
    ProcedureError
        If the bench file is not valid.
    """
    from verirun.register.store import now_text

    located = yamlfile.load_file(bench_path)
    bench = load_bench_text(located.text, located.source)  # every problem of the file, file:line
    cal = bench.file.calibrator
    raw = located.data["calibrator"]
    row = {
        "asset": cal.asset,
        "description": cal.description,
        "certificate": certificate or cal.certificate,
        "calibration_due": due or cal.calibration_due,
        "traceability": cal.traceability,
        "accuracy": json.dumps(
            raw.get("accuracy") or [], ensure_ascii=False, sort_keys=True, default=str
        ),
        "entered": now_text(),
        "entered_by": by,
    }
    with register.engine.begin() as connection:
        latest = (
            connection.execute(
                sa.select(sa.func.max(standards.c.revision)).where(standards.c.asset == cal.asset)
            ).scalar()
            or 0
        )
        connection.execute(standards.insert().values(**row, revision=latest + 1))
    return {**row, "revision": latest + 1}


def load_bench(path: str | Path) -> Bench:
    """Load a bench file; a calibrator given by asset alone takes the rest from the register.

    Raises
    ------
    ProcedureError
        If the file is invalid, or names a standard by asset with no register named, or one
        the register does not hold.
    """
    from verirun.register.config import named

    located = yamlfile.load_file(path)
    data = located.data if isinstance(located.data, dict) else {}
    cal = data.get("calibrator")
    if not isinstance(cal, dict) or "certificate" in cal or not isinstance(cal.get("asset"), str):
        return load_bench_text(located.text, located.source)
    given = [key for key in SUPPLIED if key in cal]
    if given:
        raise ProcedureError(
            [
                located.problem(
                    ("calibrator", key),
                    "a calibrator named by asset alone takes"
                    f" its {key} from the register; give the certificate here too,"
                    " or leave both to the register",
                )
                for key in given
            ]
        )
    name = named()
    if name is None:
        raise ProcedureError(
            located.problem(
                ("calibrator", "certificate"),
                "missing: give the standard's"
                " certificate, calibration-due and accuracy here, or keep them in"
                " the lab register and name it (--register or VERIRUN_REGISTER)",
                missing=True,
            )
        )
    from verirun.register.db import open_register

    register = open_register(name)
    standard = current_standard(register, cal["asset"])
    if standard is None:
        raise ProcedureError(
            located.problem(
                ("calibrator", "asset"),
                f"the register {register.name} holds no"
                f" standard {cal['asset']!r}; enter it with 'verirun register"
                " standard --from-bench FILE'",
            )
        )
    return load_bench_text(with_standard(located, standard, register.name), located.source)


def with_standard(located: yamlfile.LocatedData, standard: dict, register_name: str) -> str:
    """The bench text with the standard's certificate, due date and accuracy written in after
    the calibrator's asset line (JSON flow values, which are YAML)."""
    lines = located.text.splitlines(keepends=True)
    at = located.line_of(("calibrator", "asset"))  # 1-based
    asset_line = lines[at - 1]
    indent = asset_line[: len(asset_line) - len(asset_line.lstrip())]
    due = standard["calibration_due"]
    due = due.isoformat() if hasattr(due, "isoformat") else str(due)
    block = [
        f"{indent}# from the lab register {json.dumps(register_name)}: standard"
        f" {json.dumps(standard['asset'])} revision {standard['revision']}\n",
        f"{indent}certificate: {json.dumps(standard['certificate'], ensure_ascii=False)}\n",
        f"{indent}calibration-due: {due}\n",
    ]
    if standard.get("traceability") and "traceability" not in located.data["calibrator"]:
        block.append(
            f"{indent}traceability: {json.dumps(standard['traceability'], ensure_ascii=False)}\n"
        )
    block.append(f"{indent}accuracy: {json.dumps(standard['accuracy'], ensure_ascii=False)}\n")
    if not asset_line.endswith("\n"):
        lines[at - 1] = asset_line + "\n"
    return "".join(lines[:at] + block + lines[at:])
