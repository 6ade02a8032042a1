"""Benchmark: bad and hostile input through the command line, as a technician or an auditor
would try it (all synthetic).

Each case edits a valid job (the commented template, filled in, with an independent synthetic
track) or its track file, or tampers with a records database, then runs the command in
process.  A case passes when the command exits with the code expected (2 for bad input, 7 for
``records verify`` finding tampering) with a one-line message naming the input; an exception
escaping the command (a traceback, exit 1) or a wrong exit code is a failure.  Printed: each
case, its exit code, the seconds it took and the first words of its message; then the totals
(cases tried, clear refusals, tracebacks).

Run:  python -P benchmarks/bench_hostile_input.py [--keep DIR]
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import shutil
import sqlite3
import tempfile
import time
from pathlib import Path

import numpy as np

from fitdrag.cli import main
from fitdrag.run.job_template import PLACEHOLDERS, TEMPLATE

FLIGHT = """t,x,y
"""


def track_text(n: int = 300, fps: float = 500.0) -> str:
    """A vacuum parabola with 0.3 mm noise (synthetic): enough for the job to run."""
    t = np.arange(n) / fps
    rng = np.random.default_rng(3)
    x = 9.0 * t + rng.normal(0, 3e-4, n)
    y = 1.0 + 4.0 * t - 0.5 * 9.80665 * t**2 + rng.normal(0, 3e-4, n)
    rows = zip(t.tolist(), x.tolist(), y.tolist(), strict=True)
    return FLIGHT + "".join(f"{a!r},{b!r},{c!r}\n" for a, b, c in rows)


def edited_template() -> str:
    text = TEMPLATE
    for value in PLACEHOLDERS.values():
        text = text.replace(f'"{value}"', f'"{value} (edited)"', 1)
    return text


def job_cases() -> list[tuple[str, dict[str, str]]]:
    """(name, {old: new}) edits of the filled-in template."""
    return [
        ("mass = inf", {"mass = 0.0027 ": "mass = inf "}),
        ("mass = nan", {"mass = 0.0027 ": "mass = nan "}),
        ("mass = 1e300", {"mass = 0.0027 ": "mass = 1e300 "}),
        ("mass 24 kg in a 40 mm ball (denser than osmium)", {"mass = 0.0027 ": "mass = 24 "}),
        (
            "mass_uncertainty 83 % of the mass",
            {
                "mass = 0.0027 ": "mass = 0.024 ",
                "mass_uncertainty = 0.00001 ": "mass_uncertainty = 0.02 ",
            },
        ),  # fmt: skip
        ("negative uncertainty", {"diameter_uncertainty = 0.00005": "diameter_uncertainty = -1"}),
        ("missing mass_uncertainty", {"mass_uncertainty = 0.00001 ": "# "}),
        ("pressure 1013 (hPa as Pa)", {"pressure = 100800 ": "pressure = 1013 "}),
        ("pressure in a unit of length", {"pressure = 100800 ": 'pressure = "3 m" '}),
        ("fps = 0", {"fps = 500 ": "fps = 0 "}),
        (
            "terminal escape in specimen id",
            {'id = "SYN-BALL-001 (edited)"': 'id = "SYN\\u001b[2J"'},
        ),  # fmt: skip
        (
            "right-to-left override in customer",
            {'customer = "Fictitious Sports Goods Ltd (edited)"': 'customer = "ACME\u202eLTD"'},
        ),
        (
            "CJK customer the font cannot draw",
            {'customer = "Fictitious Sports Goods Ltd (edited)"': 'customer = "株式会社"'},
        ),
        ("5000-character text", {'notes = "': 'notes = "' + "x" * 5000}),
        ("unknown key", {"[camera]\n": '[camera]\nlens = "wide"\n'}),
        ("missing track file", {'track = "throw1.csv"': 'track = "none.csv"'}),
        ("no approved_by, no --draft", {'approved_by = "B. Reviewer"': "# nobody"}),
    ]


def track_cases() -> list[tuple[str, str]]:
    """(name, track text) of hostile track files."""
    good = track_text().splitlines()
    big_field = good.copy()
    big_field[5] = "0.01," + "9" * 5_000_000 + ",1"
    huge = good.copy()
    huge[5] = "0.008,1e300,1.0"
    nul = good.copy()
    nul[5] = "0.008,\x00,1"
    neg_inf = good.copy()
    neg_inf[5] = "0.008,-inf,1"
    header = ["# fps: 1000"] + good
    rows = ["t,x,y"] + [f"{k / 1000:.3f},{k},{k}" for k in range(1_100_000)]
    return [
        ("cell 1e300", "\n".join(huge)),
        ("5 MB field", "\n".join(big_field)),
        ("NUL in a cell", "\n".join(nul)),
        ("-inf in a cell", "\n".join(neg_inf)),
        ("header fps 1000 vs job 500", "\n".join(header)),
        ("1.1 million rows", "\n".join(rows)),
        ("empty file", ""),
        ("header only", "t,x,y\n"),
        ("y axis downwards (fit diagnosis)", None),
    ]


def run(argv) -> tuple[int, str, float]:
    err = io.StringIO()
    out = io.StringIO()
    t0 = time.perf_counter()
    try:
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
            code = main(argv)
    except SystemExit as exc:  # argparse
        code = int(exc.code or 0)
    except Exception as exc:  # noqa: BLE001 - a traceback is what this benchmark counts
        return 1, f"TRACEBACK {type(exc).__name__}: {exc}", time.perf_counter() - t0
    msg = (err.getvalue().strip() or out.getvalue().strip()).splitlines()
    return code, (msg[-1] if msg else ""), time.perf_counter() - t0


def main_(keep: str | None) -> None:
    base = Path(keep) if keep else Path(tempfile.mkdtemp(prefix="fitdrag-hostile-"))
    base.mkdir(parents=True, exist_ok=True)
    os.environ["FITDRAG_RECORDS"] = str(base / "lab.sqlite")
    results = []

    def case(name, argv, expect):
        code, msg, dt = run(argv)
        ok = code == expect and not msg.startswith("TRACEBACK")
        if ok and expect == 2 and " error: " not in msg:  # a refusal names what and where
            ok = False
        results.append((name, code, expect, ok, msg.startswith("TRACEBACK"), dt))
        print(f"{'ok  ' if ok else 'FAIL'} exit {code} (expected {expect}) {dt:6.2f} s  {name}: "
              f"{msg[:110]}")  # fmt: skip

    # the README's rule, taken as written: a bare uncertainty beside "2.70 g" is in grams
    d = base / "unit_rule"
    d.mkdir(exist_ok=True)
    (d / "throw1.csv").write_text(track_text())
    text = edited_template().replace("mass = 0.0027 ", 'mass = "2.70 g" ', 1)
    (d / "job.toml").write_text(text.replace("mass_uncertainty = 0.00001 ",
                                             "mass_uncertainty = 0.01 ", 1))  # fmt: skip
    code, msg, dt = run(["run", str(d / "job.toml"), "--quiet", "--draft"])
    js = next((d / "certificates").glob("DRAFT-*.json"), None)
    u = None if js is None else __import__("json").loads(js.read_text())["specimen"]["mass"]
    print(f"     exit {code}            {dt:6.2f} s  job: mass \"2.70 g\" with "
          f"mass_uncertainty = 0.01: read as {u}")  # fmt: skip
    for i, (name, edits) in enumerate(job_cases()):
        d = base / f"job{i:02d}"
        d.mkdir(exist_ok=True)
        (d / "throw1.csv").write_text(track_text())
        text = edited_template()
        for old, new in edits.items():
            assert old in text, old
            text = text.replace(old, new, 1)
        (d / "job.toml").write_text(text, encoding="utf-8")
        case(f"job: {name}", ["run", str(d / "job.toml"), "--quiet"], 2)
    for i, (name, track) in enumerate(track_cases()):
        d = base / f"track{i:02d}"
        d.mkdir(exist_ok=True)
        text = edited_template()
        if track is None:  # a valid file whose y axis points down: the fit cannot work
            lines = track_text().splitlines()
            flipped = [lines[0]] + [
                f"{a},{b},{-float(c)!r}" for a, b, c in (ln.split(",") for ln in lines[1:])
            ]
            (d / "throw1.csv").write_text("\n".join(flipped))
            case(f"track: {name}", ["fit", str(d / "throw1.csv"), "--mass", "2.7g",
                                    "--diameter", "40mm"], 3)  # fmt: skip
            continue
        (d / "throw1.csv").write_text(track, encoding="utf-8")
        (d / "job.toml").write_text(text, encoding="utf-8")
        case(f"track: {name}", ["run", str(d / "job.toml"), "--quiet"], 2)
    # tampering with the records of a certificate issued for the purpose
    d = base / "records"
    d.mkdir(exist_ok=True)
    (d / "throw1.csv").write_text(track_text())
    (d / "job.toml").write_text(edited_template(), encoding="utf-8")
    code, msg, _ = run(["run", str(d / "job.toml"), "--quiet"])
    assert code in (0, 4, 5, 6), msg
    case("identical re-run", ["run", str(d / "job.toml"), "--quiet"], 2)
    db = base / "lab.sqlite"
    con = sqlite3.connect(db)
    con.execute("DROP TRIGGER certificates_never_updated")
    con.execute("UPDATE certificates SET drag_coefficient = 0.40")
    con.commit()
    con.close()
    case("records: forged Cd", ["records", "verify"], 7)
    pdf = next((d / "certificates").glob("*.pdf"))
    pdf.write_bytes(pdf.read_bytes() + b"%")
    case("records: PDF changed", ["records", "verify"], 7)
    n = len(results)
    clear = sum(r[3] for r in results)
    tracebacks = sum(r[4] for r in results)
    print(f"\n{n} cases tried; {clear} refused clearly with the expected exit code; "
          f"{tracebacks} tracebacks; slowest {max(r[5] for r in results):.2f} s")  # fmt: skip
    if not keep:
        shutil.rmtree(base, ignore_errors=True)


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--keep", metavar="DIR", help="keep the cases' files in DIR")
    main_(ap.parse_args().keep)
