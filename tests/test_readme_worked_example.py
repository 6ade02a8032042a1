"""The README's worked example and its "Records and review" section, run as written.

Every ``$ fitdrag ...`` line in those sections' text blocks is run (in a working folder ``lab/``
beside a copy of ``sample_tracks/``, with the job file of step 3 taken from the README), and
what it prints must be the lines that follow it in the README, after masking what changes from
run to run: dates and times, the year in certificate numbers, SHA-256 digests, the temporary
folders, the draft's time stamp and the Monte Carlo interval and time (its trials are random
unless the job sets a seed).  Labels: regression (the README shows what the program prints).
"""

from __future__ import annotations

import re
import shlex
import shutil
from pathlib import Path

import pytest

from fitdrag.cli import main

ROOT = Path(__file__).resolve().parents[1]
README_LAB = "/tmp/fitdrag/lab"
README_HOME = "/home/lab"


def _section(text: str, heading: str) -> str:
    return text.split(f"\n## {heading}", 1)[1].split("\n## ", 1)[0]


def _steps(section: str) -> list[tuple[str, list[str]]]:
    """(command, printed lines) for every ``$ `` line of the section's text blocks."""
    steps = []
    for block in re.findall(r"```text\n(.*?)```", section, flags=re.S):
        for line in block.splitlines():
            if line.startswith("$ "):
                steps.append((line[2:], []))
            elif steps:
                steps[-1][1].append(line)
    return steps


def _normalised(lines, lab: Path, home: Path) -> list[str]:
    out = []
    for ln in lines:
        ln = ln.replace(str(lab), README_LAB).replace(str(home), README_HOME)
        ln = re.sub(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d", "DATE", ln)
        ln = re.sub(r"\b([A-Z]+)-\d{4}-(\d{6})\b", r"\1-YYYY-\2", ln)
        ln = re.sub(r"DRAFT-job-\d{8}T\d{6}", "DRAFT-job-STAMP", ln)
        ln = re.sub(r"\b[0-9a-f]{64}\b", "SHA256", ln)
        ln = re.sub(r"re-fits, [0-9.]+ s on \d+ process\(es\)\): .*", "re-fits ...", ln)
        out.append(" ".join(ln.split()))
    return [ln for ln in out if ln]


@pytest.fixture
def lab(tmp_path, monkeypatch):
    """``lab/`` beside ``sample_tracks/`` (the clip copied), the user's folders temporary and
    no FITDRAG_RECORDS: the records go to the data folder, as on a fresh machine."""
    (tmp_path / "sample_tracks").mkdir()
    shutil.copy(ROOT / "sample_tracks" / "foam_ball_clip.avi", tmp_path / "sample_tracks")
    lab = tmp_path / "lab"
    lab.mkdir()
    home = tmp_path / "home"
    monkeypatch.delenv("FITDRAG_RECORDS", raising=False)
    monkeypatch.setenv("XDG_DATA_HOME", str(home / ".local" / "share"))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home / ".config"))
    monkeypatch.chdir(lab)
    return lab, home


def test_worked_example_and_records_and_review_print_what_the_readme_shows(lab, capsys):
    """regression: steps 1, 2 and 4 of the worked example, then the records and review
    example (draft, release replacing the first certificate, list, verify), print what the
    README shows."""
    lab, home = lab
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    worked = _section(readme, "Worked example: from footage to certificate")
    (job_text,) = re.findall(r"```toml\n(.*?)```", worked, flags=re.S)
    (lab / "job.toml").write_text(job_text, encoding="utf-8")
    # the adaptive Monte Carlo example (10^5 trials allowed) is run, with the same seed, by
    # benchmarks/bench_budget.py, which prints it: not repeated here
    steps = [s for s in _steps(worked) if "--adaptive" not in s[0]]
    steps += _steps(_section(readme, "Records and review"))
    assert [c.split()[1] for c, _ in steps] == ["track", "fit", "run", "records", "run",
                                                "release", "records", "records"]  # fmt: skip
    for command, shown in steps:
        drafts = sorted(lab.glob("certificates/DRAFT-job-*.json"))
        if drafts:
            command = re.sub(r"certificates/DRAFT-job-\d{8}T\d{6}\.json",
                             f"certificates/{drafts[-1].name}", command)  # fmt: skip
        argv = shlex.split(command)
        assert argv[0] == "fitdrag"
        code = main(argv[1:])
        out = capsys.readouterr().out
        assert code == 0, (command, out)
        assert _normalised(out.splitlines(), lab, home) == _normalised(shown, lab, home), command
