"""The command line frame and `whiten demo` work end to end (exit codes are common practice: 0/1/2)."""

from __future__ import annotations

import subprocess
import sys

import pytest

from whiten.cli import main


def test_demo_runs_and_refuses_to_overwrite(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path), "--only", "kiln"]) == 0
    out = capsys.readouterr().out
    assert "tc_avg12 is a linear combination of tc_top, tc_mid" in out
    assert "not a protective function" in out
    assert (tmp_path / "kiln" / "kiln_readings.csv").stat().st_size > 1000
    assert main(["demo", "--out", str(tmp_path), "--only", "kiln"]) == 1
    err = capsys.readouterr().err
    assert "already exists" in err and "--force" in err and "Traceback" not in err
    assert main(["demo", "--out", str(tmp_path), "--only", "kiln", "--force"]) == 0


def test_unknown_scenario_is_one_line_error(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path), "--only", "nope"]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "unknown scenario 'nope'" in err[0]


def test_usage_error_exits_2():
    with pytest.raises(SystemExit) as exc:
        main(["demo"])  # --out is required
    assert exc.value.code == 2


def test_console_script_help():
    r = subprocess.run([sys.executable, "-m", "whiten.cli", "--help"], capture_output=True, text=True)
    assert r.returncode == 0 and "whiten demo --out demo-output" in r.stdout
