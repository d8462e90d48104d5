"""The bad-input catalogue: one table of command-line runs and one of API calls.

Every case states what a user must see (reference: the input contract of
DEVELOPERS.md and issue 14: a one-line error naming file, line, row and column,
exit 1, nothing written, no input changed; or a correct result with its
disclosure). Each run asserts the exit code or the exception class, the key
words of the message, that every input file is byte-for-byte unchanged and that
no partial or stray file (``*.part`` included) is left.
"""

from __future__ import annotations

import contextlib
import warnings

import numpy as np
import pandas as pd
import pytest

import whiten
from whiten.cli import main
from whiten.errors import InputError, JitterWarning, ModelFileError

from .conftest import snapshot
from .shift_cases import CLI as SHIFT_CLI


def _rows(fmt: str) -> str:
    return "".join(fmt.format(u=(i * 0.37) % 1 - 0.5, v=(i * 0.61) % 1 - 0.5, w=(i * 0.23) % 1) + "\n"
                   for i in range(1, 13))


BIG160 = "y,x1,x2\n" + _rows("{u:.3f},{v:.4f}e160,{w:.3f}")
BIG300 = "a,b,c\n" + _rows("{u:.3f},{v:.4f}e300,{w:.3f}")
SMALL300 = "a,b,c\n" + _rows("{u:.3f},{v:.4f}e-300,{w:.3f}")
TINY200_Y160 = "x1,y,x2\n" + _rows("{u:.3f}e-200,{v:.4f}e160,{w:.3f}")
CONST_DUP = "a,k,b,a2\n" + _rows("{u:.3f},1,{w:.3f},{u:.3f}")
GOOD = "a,b,c\n0.1,0.2,0.3\n-0.4,0.5,0.1\n0.3,-0.2,0.4\n"
WEIGHTED = "a,b,c,n\n" + _rows("{u:.3f},{v:.3f},{w:.3f},{{w}}").replace("{w}", "{w0}", 1)
DEEP = '{"format": "whiten.baseline/2", "payload": ' + "[" * 5000 + "]" * 5000 + ', "sha256": "0"}'
MODEL = "<model>"  # placeholder: the catalogue's model file

# (id, files {name: text}, argv, exit code, key words of stderr, files the run may create)
CLI = [
    # -- score: values that are not finite numbers (one validation path with the API)
    ("score-all-inf-row", {"d.csv": "a,b,c\n1,2,3\ninf,inf,inf\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["d.csv", "line 3", "row 1", "column 'a'", "inf", "finite"], []),
    ("score-one-inf", {"d.csv": "a,b,c\n1,2,3\n1,inf,0\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["line 3", "column 'b'", "inf"], []),
    ("score-minus-inf", {"d.csv": "a,b,c\n1,2,-inf\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["line 2", "column 'c'", "-inf"], []),
    ("score-inf-report", {"d.csv": "a,b,c\n1,2,3\n1,inf,0\n"},
     "score d.csv --baseline m.json -o s.csv --report r.html", 1, ["line 3", "column 'b'"], []),
    ("score-inf-contributions", {"d.csv": "a,b,c\n1,2,3\n1,inf,0\n"},
     "score d.csv --baseline m.json -o s.csv --contributions c.png", 1, ["line 3", "column 'b'"], []),
    ("score-inf-chart", {"d.csv": "a,b,c\n1,2,3\n1,inf,0\n"},
     "score d.csv --baseline m.json -o s.csv --chart c.png", 1, ["line 3", "inf"], []),
    ("score-inf-after-nan", {"d.csv": "a,b,c\n1,,3\n,inf,3\n"},
     "score d.csv --baseline m.json -o s.csv --index-column c", 1, ["line 3", "row 1", "index 3", "'b'"], []),
    ("score-inf-index-label", {"d.csv": "t,a,b,c\nt0,1,2,3\nt1,1,2,inf\n"},
     "score d.csv --baseline m.json -o s.csv --index-column t", 1, ["index 't1'", "line 3", "'c'"], []),
    ("score-inf-fdr", {"d.csv": "a,b,c\n1,2,3\n1,inf,0\n"}, "score d.csv --baseline m.json -o s.csv --fdr 0.1",
     1, ["line 3", "inf"], []),
    ("score-inf-small-chunks", {"d.csv": "a,b,c\n1,2,3\n1,2,3\n1,2,3\n1,2,inf\n"},
     "score d.csv --baseline m.json -o s.csv --chunksize 1", 1, ["line 5", "row 3", "'c'"], []),
    ("score-text-cell", {"d.csv": "a,b,c\n1,2,3\n1,x,0\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["not numeric", "line 3", "'b'", "'x'"], []),
    # -- CSV shape: fields never shifted
    ("score-thousands-unquoted", {"d.csv": "a,b,c\n1,2,3\n10,189,2,3\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["line 3", "4 fields", "thousands", "--sep"], []),
    ("score-thousands-quoted", {"d.csv": 'a,b,c\n1,"10,189",3\n'}, "score d.csv --baseline m.json -o s.csv",
     1, ["not numeric", "line 2", "thousands"], []),
    ("score-extra-field", {"d.csv": "a,b,c\n1,2,3,4\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["line 2", "more than the 3"], []),
    ("score-short-row", {"d.csv": "a,b,c\n1,2,3\n1,2\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["line 3", "fewer", "empty field"], []),
    ("score-short-row-after-quoted-newline", {"d.csv": 't,a,b,c\n"x\ny",1,2,3\nz,1,2\n'},
     "score d.csv --baseline m.json -o s.csv --index-column t", 1, ["line 4", "fewer"], []),
    ("score-semicolon-header", {"d.csv": "a;b;c\n1,5;2;3\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["one column", "--sep ';'", "--decimal ','"], []),
    ("score-tab-in-csv", {"d.csv": "a\tb\tc\n1\t2\t3\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["one column", "--sep tab"], []),
    ("score-duplicate-header", {"d.csv": "a,b,a\n1,2,3\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["more than once", "'a'", "fields 1, 3"], []),
    ("score-missing-column", {"d.csv": "a,b\n1,2\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["missing columns", "'c'"], []),
    ("score-empty-file", {"d.csv": ""}, "score d.csv --baseline m.json -o s.csv", 1, ["empty"], []),
    ("score-header-only", {"d.csv": "a,b,c\n"}, "score d.csv --baseline m.json -o s.csv", 1, ["no data rows"], []),
    ("score-no-data-file", {}, "score nope.csv --baseline m.json -o s.csv", 1, ["nope.csv", "not found"], []),
    ("score-data-is-folder", {"sub/x.csv": GOOD}, "score sub --baseline m.json -o s.csv", 1, ["folder"], []),
    ("score-unknown-extension", {"d.xlsx": GOOD}, "score d.xlsx --baseline m.json -o s.csv", 1, ["format"], []),
    ("score-bad-index-column", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --index-column t",
     1, ["'t'"], []),
    # -- European exports
    ("score-european-ok", {"d.csv": "a;b;c\n0,1;0,2;0,3\n-0,4;;0,1\n"},
     "score d.csv --baseline m.json -o s.csv --sep ; --decimal ,", 0, [], ["s.csv"]),
    ("score-european-dot-thousands", {"d.csv": "a;b;c\n1.234,5;0,2;0,3\n"},
     "score d.csv --baseline m.json -o s.csv --sep ; --decimal ,", 1, ["'1.234,5'", "thousands", "line 2"], []),
    ("score-european-plain-dot", {"d.csv": "a;b;c\n1.5;0,2;0,3\n"},
     "score d.csv --baseline m.json -o s.csv --sep ; --decimal ,", 1, ["'1.5'", "--decimal '.'"], []),
    ("score-decimal-equals-sep", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --decimal ,",
     1, ["separator", "--sep ';'"], []),
    ("score-sep-two-chars", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --sep ab",
     1, ["--sep", "one character"], []),
    ("score-sep-tab-word", {"d.tsv": "a\tb\tc\n0.1\t0.2\t0.3\n"},
     "score d.tsv --baseline m.json -o s.csv --sep tab", 0, [], ["s.csv"]),
    ("score-decimal-bad-choice", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --decimal ;", 2, [], []),
    ("score-semicolon-explicit-ok", {"d.csv": "a;b;c\n0.1;0.2;0.3\n"},
     "score d.csv --baseline m.json -o s.csv --sep ;", 0, [], ["s.csv"]),
    ("score-bom-header-ok", {"d.csv": "\ufeff" + GOOD}, "score d.csv --baseline m.json -o s.csv", 0, [], ["s.csv"]),
    ("score-crlf-ok", {"d.csv": GOOD.replace("\n", "\r\n")}, "score d.csv --baseline m.json -o s.csv",
     0, [], ["s.csv"]),
    # -- outputs
    ("score-output-is-data", {"d.csv": GOOD}, "score d.csv --baseline m.json -o ./d.csv --force",
     1, ["-o", "data file", "never written over"], []),
    ("score-output-is-model", {"d.csv": GOOD}, "score d.csv --baseline m.json -o m.json --force",
     1, ["--baseline"], []),
    ("score-chart-is-model", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --chart m.json --force",
     1, ["--chart", "--baseline"], []),
    ("score-report-is-data", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --report d.csv --force",
     1, ["--report", "data"], []),
    ("score-chart-same-as-output", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --chart s.csv",
     1, ["same file"], []),
    ("score-output-exists", {"d.csv": GOOD, "s.csv": "keep me\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["already exists", "--force"], []),
    ("score-output-folder-missing", {"d.csv": GOOD}, "score d.csv --baseline m.json -o no/s.csv",
     1, ["does not exist"], []),
    ("score-stale-part-reported", {"d.csv": GOOD, ".x.csv.w999999999.abc.part": "half"},
     "score d.csv --baseline m.json -o s.csv", 0, ["killed", "--force"], ["s.csv"]),
    ("score-stale-part-removed", {"d.csv": GOOD, ".x.csv.w999999999.abc.part": "half"},
     "score d.csv --baseline m.json -o s.csv --force", 0, ["removed"], ["s.csv", "-.x.csv.w999999999.abc.part"]),
    # -- options
    ("score-alpha-zero", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --alpha 0", 1, ["alpha"], []),
    ("score-alpha-above-one", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --alpha 1.5",
     1, ["alpha"], []),
    ("score-fdr-two", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --fdr 2", 1, ["--fdr"], []),
    ("score-chunksize-zero", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --chunksize 0",
     1, ["--chunksize"], []),
    ("score-chart-points-zero", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --chart-points 0",
     1, ["--chart-points"], []),
    ("score-alpha-text", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --alpha lots", 2, [], []),
    # -- model files
    ("score-model-missing", {"d.csv": GOOD}, "score d.csv --baseline none.json -o s.csv", 1, ["not found"], []),
    ("score-model-not-json", {"d.csv": GOOD, "x.json": "{not json"}, "score d.csv --baseline x.json -o s.csv",
     1, ["not valid JSON", "line 1"], []),
    ("score-model-deep", {"d.csv": GOOD, "x.json": DEEP}, "score d.csv --baseline x.json -o s.csv",
     1, ["nested"], []),
    ("score-model-empty", {"d.csv": GOOD, "x.json": ""}, "score d.csv --baseline x.json -o s.csv", 1, ["empty"], []),
    ("score-model-other-format", {"d.csv": GOOD, "x.json": '{"format": "other/1"}'},
     "score d.csv --baseline x.json -o s.csv", 1, ["format"], []),
    ("inspect-model-deep", {"x.json": DEEP}, "inspect x.json", 1, ["nested"], []),
    ("inspect-model-missing", {}, "inspect none.json", 1, ["not found"], []),
    ("inspect-model-list", {"x.json": "[1, 2]"}, "inspect x.json", 1, ["format"], []),
    # -- baseline
    ("baseline-inf", {"d.csv": "a,b,c\n1,2,3\ninf,2,3\n"}, "baseline d.csv -o b.json",
     1, ["d.csv", "line 3", "row 1", "'a'", "inf"], []),
    ("baseline-thousands", {"d.csv": "a,b,c\n1,2,3\n10,189,2,3\n"}, "baseline d.csv -o b.json",
     1, ["line 3", "4 fields"], []),
    ("baseline-semicolon", {"d.csv": "a;b;c\n1;2;3\n"}, "baseline d.csv -o b.json", 1, ["--sep"], []),
    ("baseline-duplicate-header", {"d.csv": "a,b,a\n1,2,3\n4,5,6\n"}, "baseline d.csv -o b.json",
     1, ["more than once"], []),
    ("baseline-output-is-data", {"d.csv": GOOD}, "baseline d.csv -o d.csv --force", 1, ["data file"], []),
    ("baseline-text-cell", {"d.csv": "a,b,c\n1,2,3\n4,?,6\n"}, "baseline d.csv -o b.json",
     1, ["not numeric", "line 3", "'b'"], []),
    ("baseline-unknown-column", {"d.csv": GOOD}, "baseline d.csv -o b.json --columns a,zz", 1, ["'zz'"], []),
    ("baseline-output-exists", {"d.csv": GOOD, "b.json": "{}"}, "baseline d.csv -o b.json",
     1, ["already exists", "--force"], []),
    ("baseline-short-row", {"d.csv": "a,b,c\n1,2,3\n4,5\n7,8,9\n"}, "baseline d.csv -o b.json",
     1, ["line 3", "fewer"], []),
    ("baseline-european-ok", {"d.csv": "a;b;c\n0,1;0,2;0,3\n-0,4;0,5;0,1\n0,3;-0,2;0,4\n1,0;0,1;-0,2\n"},
     "baseline d.csv -o b.json --sep ; --decimal ,", 0, [], ["b.json"]),
    # -- regress
    ("regress-duplicate-header", {"d.csv": "y,x,x\n1,2,3\n"}, "regress d.csv --response y -o f.json",
     1, ["more than once"], []),
    ("regress-semicolon", {"d.csv": "y;x\n1;2\n"}, "regress d.csv --response y -o f.json", 1, ["--sep"], []),
    ("regress-output-is-data", {"d.csv": "y,x\n1,2\n2,3\n3,5\n"}, "regress d.csv --response y -o d.csv --force",
     1, ["data file"], []),
    ("regress-inf", {"d.csv": "y,x\n1,2\n2,inf\n3,4\n"}, "regress d.csv --response y -o f.json",
     1, ["line 3", "'x'", "inf"], []),
    ("regress-text-cell", {"d.csv": "y,x\n1,2\n2,abc\n"}, "regress d.csv --response y -o f.json",
     1, ["not numeric", "line 3"], []),
    ("regress-ragged", {"d.csv": "y,x\n1,2\n2,3,4\n"}, "regress d.csv --response y -o f.json",
     1, ["line 3", "3 fields"], []),
    ("regress-coverage-two", {"d.csv": "y,x\n1,2\n2,3\n3,5\n"}, "regress d.csv --response y -o f.json --coverage 2",
     1, ["--coverage"], []),
    ("regress-missing-response", {"d.csv": "y,x\n1,2\n"}, "regress d.csv --response z -o f.json", 1, ["'z'"], []),
    # columns at 1e+-160 / 1e+-300 are equilibrated now (tests/accuracy/test_extreme_scales.py); what stays
    # refused is a coefficient beyond the float64 range itself
    ("regress-coefficient-beyond-range", {"d.csv": TINY200_Y160}, "regress d.csv --response y -o f.json",
     1, ["scale problem", "'x1'", "float64 range"], []),
    ("baseline-constant-and-duplicate", {"d.csv": CONST_DUP}, "baseline d.csv -o b.json",
     1, ["constant", "'k'", "linearly dependent", "a2"], []),
    ("baseline-one-row", {"d.csv": "a,b,c\n1,2,3\n"}, "baseline d.csv -o b.json", 1, ["1 complete row"], []),
    # -- weights given as a column of the file: the file, its line and the weight column are named
    ("baseline-weights-all-zero", {"d.csv": WEIGHTED.format(w0=0, w=0)}, "baseline d.csv -o b.json --weight-column n",
     1, ["d.csv", "weight column 'n'", "0 in every one of the 12", "positive weight"], []),
    ("baseline-weights-negative", {"d.csv": WEIGHTED.format(w0=-2, w=1)}, "baseline d.csv -o b.json --weight-column n",
     1, ["d.csv", "line 2", "row 0", "weight column 'n'", "-2", "non-negative"], []),
    ("baseline-weights-missing", {"d.csv": WEIGHTED.format(w0="", w=1)}, "baseline d.csv -o b.json --weight-column n",
     1, ["d.csv", "line 2", "weight column 'n' is missing"], []),
    ("baseline-weights-text", {"d.csv": WEIGHTED.format(w0="two", w=1)}, "baseline d.csv -o b.json --weight-column n",
     1, ["d.csv", "line 2", "column 'n'", "'two'"], []),
    ("baseline-weights-inf", {"d.csv": WEIGHTED.format(w0="inf", w=1)}, "baseline d.csv -o b.json --weight-column n",
     1, ["d.csv", "line 2", "column 'n'", "inf"], []),
    ("baseline-weights-not-a-column", {"d.csv": WEIGHTED.format(w0=1, w=1)},
     "baseline d.csv -o b.json --weight-column count", 1, ["'count'"], []),
    ("baseline-weights-with-shrinkage", {"d.csv": WEIGHTED.format(w0=1, w=1)},
     "baseline d.csv -o b.json --weight-column n --estimator shrinkage", 1, ["weights", "sample"], []),
    ("regress-weights-zero", {"d.csv": WEIGHTED.format(w0=0, w=1)}, "regress d.csv --response a --weights n -o f.json",
     1, ["d.csv", "'n'", "weight 0", "positive"], []),
    ("regress-weights-negative", {"d.csv": WEIGHTED.format(w0=1, w=-1)},
     "regress d.csv --response a --weights n -o f.json", 1, ["d.csv", "'n'", "-1", "positive"], []),
    # -- loglik
    ("loglik-inf", {"d.csv": "a,b,c\n1,2,3\ninf,2,3\n"}, "loglik d.csv --baseline m.json -o l.csv",
     1, ["d.csv", "line 3", "'a'"], []),
    ("loglik-ragged", {"d.csv": "a,b,c\n1,2,3\n1,2,3,4\n"}, "loglik d.csv --baseline m.json -o l.csv",
     1, ["line 3"], []),
    ("loglik-output-is-data", {"d.csv": GOOD}, "loglik d.csv --baseline m.json -o d.csv --force",
     1, ["data file"], []),
    ("loglik-output-is-model", {"d.csv": GOOD}, "loglik d.csv --baseline m.json -o m.json --force",
     1, ["--baseline"], []),
    ("loglik-semicolon", {"d.csv": "a;b;c\n1;2;3\n"}, "loglik d.csv --baseline m.json -o l.csv", 1, ["--sep"], []),
    ("loglik-mean-without-cov", {"d.csv": GOOD, "mu.csv": "a,b,c\n0,0,0\n"},
     "loglik d.csv --mean mu.csv -o l.csv", 1, ["--cov"], []),
]


def _run_cli(argv: list[str]) -> int:
    try:
        return main(argv)
    except SystemExit as exc:  # argparse usage errors
        return int(exc.code or 0)


CLI += SHIFT_CLI  # issue 20's cases (tests/badinput/shift_cases.py)


@pytest.mark.parametrize("case", CLI, ids=[c[0] for c in CLI])
def test_cli_case(case, tmp_path, monkeypatch, capsys, model_bytes):
    _, files, argv, code, words, created = case
    (tmp_path / "m.json").write_bytes(model_bytes)
    for name, text in files.items():
        (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / name).write_text(text, encoding="utf-8", newline="")
    monkeypatch.chdir(tmp_path)
    before = snapshot(tmp_path)
    with warnings.catch_warnings():
        warnings.simplefilter("default")
        got = _run_cli(argv.split())
    out, err = capsys.readouterr()
    assert got == code, (out, err)
    assert "Traceback" not in err
    for w in words:
        assert w in err, f"{w!r} not in {err!r}"
    if code == 1:
        lines = [ln for ln in err.splitlines() if ln.strip()]
        assert len(lines) == 1 and lines[0].startswith("whiten "), err
        assert "=True" not in err and "=[" not in err.split("(")[0]
    after = snapshot(tmp_path)
    removed = {c[1:] for c in created if c.startswith("-")}
    for name, data in before.items():  # no input changed (and only the stale files named are gone)
        if name in removed:
            assert name not in after
        else:
            assert after.get(name) == data, f"{name} changed"
    new = set(after) - set(before)
    assert new == {c for c in created if not c.startswith("-")}, new
    assert not [n for n in after if n.endswith(".part") and n not in before]


# -- the API: (id, call(tmp folder), exception class, key words of the message)
def _csv(tmp, text, name="d.csv"):
    p = tmp / name
    p.write_text(text, encoding="utf-8", newline="")
    return p


def _model(tmp):
    return whiten.load_baseline(tmp / "m.json")


API = [
    ("open-duplicate-header", lambda t: whiten.io.tables.open_table(_csv(t, "a,b,a\n1,2,3\n")),
     InputError, ["more than once", "'a'"]),
    ("open-semicolon", lambda t: whiten.io.tables.open_table(_csv(t, "a;b\n1;2\n")), InputError, ["sep=';'"]),
    ("open-empty", lambda t: whiten.io.tables.open_table(_csv(t, "")), InputError, ["empty"]),
    ("open-sep-int", lambda t: whiten.io.tables.open_table(_csv(t, GOOD), sep=1), InputError, ["sep"]),
    ("open-sep-quote", lambda t: whiten.io.tables.open_table(_csv(t, GOOD), sep='"'), InputError, ["sep"]),
    ("open-decimal-semicolon", lambda t: whiten.io.tables.open_table(_csv(t, GOOD), decimal=";"),
     InputError, ["decimal", "'.' or ','"]),
    ("open-decimal-is-sep", lambda t: whiten.io.tables.open_table(_csv(t, GOOD), sep=",", decimal=","),
     InputError, ["separator"]),
    ("chunks-long-row", lambda t: list(whiten.io.tables.open_table(_csv(t, "a,b\n1,2\n3,4,5\n")).chunks(["a"])),
     InputError, ["line 3", "3 fields"]),
    ("chunks-short-row", lambda t: list(whiten.io.tables.open_table(_csv(t, "a,b\n1\n")).chunks(["a"])),
     InputError, ["line 2", "fewer"]),
    ("chunks-quoted-thousands", lambda t: list(whiten.io.tables.open_table(_csv(t, 'a,b\n"1,234",2\n')).chunks(["a"])),
     InputError, ["thousands", "line 2"]),
    ("chunks-inf", lambda t: list(whiten.io.tables.open_table(_csv(t, "a,b\n1,2\n3,-inf\n")).chunks(["b"])),
     InputError, ["line 3", "'b'", "-inf"]),
    ("chunks-decimal-comma-dot", lambda t: list(whiten.io.tables.open_table(
        _csv(t, "a;b\n1.000;2\n"), sep=";", decimal=",").chunks(["a"])), InputError, ["thousands"]),
    ("fit-baseline-duplicate-header", lambda t: whiten.fit_baseline(_csv(t, "a,b,a\n1,2,3\n")),
     InputError, ["more than once"]),
    ("fit-baseline-ragged", lambda t: whiten.fit_baseline(_csv(t, "a,b\n1,2\n3,4,5\n6,7\n")),
     InputError, ["line 3"]),
    ("fit-baseline-inf", lambda t: whiten.fit_baseline(_csv(t, "a,b\n1,2\n3,inf\n6,7\n")),
     InputError, ["line 3", "'b'"]),
    ("fit-baseline-sep-on-array", lambda t: whiten.fit_baseline(np.eye(3), sep=";"), InputError, ["sep"]),
    ("score-path-inf", lambda t: whiten.monitor.score(_model(t), _csv(t, "a,b,c\n1,2,inf\n")),
     InputError, ["line 2", "'c'"]),
    ("score-sep-on-frame", lambda t: whiten.monitor.score(_model(t), np.zeros((1, 3)), sep=";"),
     InputError, ["sep"]),
    ("score-file-output-is-input", lambda t: whiten.monitor.score_file(_model(t), _csv(t, GOOD), t / "d.csv",
                                                                       force=True), InputError, ["data file"]),
    ("score-file-ragged", lambda t: whiten.monitor.score_file(_model(t), _csv(t, "a,b,c\n1,2\n"), t / "s.csv"),
     InputError, ["line 2", "fewer"]),
    ("score-file-semicolon", lambda t: whiten.monitor.score_file(_model(t), _csv(t, "a;b;c\n1;2;3\n"),
                                                                 t / "s.csv"), InputError, ["sep"]),
    ("cholesky-jitter-true", lambda t: whiten.cholesky(np.eye(2), jitter=True), InputError, ["jitter", "True"]),
    ("cholesky-jitter-none", lambda t: whiten.cholesky(np.eye(2), jitter=None), InputError, ["jitter", "None"]),
    ("cholesky-jitter-text", lambda t: whiten.cholesky(np.eye(2), jitter="yes"), InputError, ["'auto'"]),
    ("cholesky-jitter-negative", lambda t: whiten.cholesky(np.eye(2), jitter=-1.0), InputError, ["non-negative"]),
    ("cholesky-jitter-nan", lambda t: whiten.cholesky(np.eye(2), jitter=float("nan")), InputError, ["jitter"]),
    ("cholesky-jitter-numpy-bool", lambda t: whiten.cholesky(np.eye(2), jitter=np.bool_(True)),
     InputError, ["jitter"]),
    ("gaussian-jitter-true", lambda t: whiten.Gaussian([0, 0], np.eye(2), jitter=True), InputError, ["jitter"]),
    ("load-deep-model", lambda t: whiten.load_baseline(_csv(t, DEEP, "x.json")), ModelFileError, ["nested"]),
    ("load-model-folder", lambda t: whiten.load_baseline(t), ModelFileError, ["folder"]),
    ("load-model-binary", lambda t: (t / "x.json").write_bytes(b"\xff\xfe\x00") and whiten.load_baseline(t / "x.json"),
     ModelFileError, ["not text"]),
    ("ragged-fit-baseline", lambda t: whiten.fit_baseline([[1, 2], [3]]), InputError, ["ragged", "data"]),
    ("ragged-logpdf", lambda t: whiten.Gaussian([0, 0], np.eye(2)).logpdf([[1, 2], [3]]), InputError, ["ragged"]),
    ("ragged-fit-linear", lambda t: whiten.fit_linear([[1, 2], [3]], [1, 2]), InputError, ["ragged", "X"]),
    ("ragged-fit-linear-y", lambda t: whiten.fit_linear(np.ones((2, 1)), [[1], [2, 3]]), InputError, ["ragged", "y"]),
    ("ragged-gaussian-mean", lambda t: whiten.Gaussian([[0], [0, 1]], np.eye(2)), InputError, ["ragged", "mean"]),
    ("ragged-cholesky", lambda t: whiten.cholesky([[1.0, 0.0], [0.0]]), InputError, ["ragged"]),
    ("fit-linear-coefficient-beyond-range", lambda t: whiten.fit_linear(
        np.c_[np.arange(9.0), np.sin(np.arange(9.0)) * 1e-200], np.cos(np.arange(9.0)) * 1e160),
     InputError, ["scale problem", "'x1'", "float64 range"]),
    # the equilibration powers come from the first chunk; a later chunk 1e300 times larger is refused
    ("baseline-later-chunk-beyond", lambda t: whiten.fit_baseline(
        [pd.DataFrame({"a": np.arange(9.0), "b": np.sin(np.arange(9.0))}),
         pd.DataFrame({"a": np.arange(9.0), "b": np.cos(np.arange(9.0)) * 1e300})]),
     InputError, ["scale problem", "'b'", "divide"]),
    ("baseline-constant-to-rounding", lambda t: whiten.fit_baseline(
        np.c_[np.arange(9.0), 1 + np.sin(np.arange(9.0)) * 1e-300]), InputError, ["constant", "'x1'"]),
    ("baseline-zero-weights", lambda t: whiten.fit_baseline(np.c_[np.arange(9.0), np.sin(np.arange(9.0))],
                                                            weights=np.zeros(9)), InputError,
     ["weight is 0 in every one of the 9"]),
    ("baseline-one-row-no-weights", lambda t: whiten.fit_baseline([[1.0, 2.0]]), InputError, ["1 complete row"]),
    ("baseline-constant-and-duplicate", lambda t: whiten.fit_baseline(
        np.c_[np.arange(9.0), np.ones(9), np.sin(np.arange(9.0)), np.arange(9.0) * 2]),
     InputError, ["constant", "'x1'", "linearly dependent", "x3"]),
    ("atomic-existing", lambda t: whiten.io.atomic.write_text(t / "m.json", "x"), InputError, ["already exists"]),
]


@pytest.mark.parametrize("case", API, ids=[c[0] for c in API])
def test_api_case(case, tmp_path, model_bytes):
    _, call, exc, words = case
    (tmp_path / "m.json").write_bytes(model_bytes)
    with pytest.raises(exc) as info:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ResourceWarning)
            before = snapshot(tmp_path)  # the call itself writes its input files first; compare after
            call(tmp_path)
    msg = str(info.value)
    for w in words:
        assert w in msg, f"{w!r} not in {msg!r}"
    after = snapshot(tmp_path)
    assert after.get("m.json") == model_bytes
    assert not [n for n in after if n.endswith(".part")]
    assert set(after) - set(before) <= {"d.csv", "x.json"}  # only the inputs the case wrote


def test_model_size_limit(tmp_path, monkeypatch, model_bytes):
    """A model file over the size limit is a ModelFileError before it is parsed."""
    import whiten.io.modelfile as mf

    (tmp_path / "m.json").write_bytes(model_bytes)
    monkeypatch.setattr(mf, "MAX_MODEL_BYTES", len(model_bytes) - 1)
    with pytest.raises(ModelFileError, match="over the limit"):
        whiten.load_baseline(tmp_path / "m.json")


def test_explicit_jitter_is_disclosed():
    """jitter=<number> adds exactly that amount (A + jI, numpy reference) and says so with a JitterWarning."""
    a = np.array([[2.0, 1.0], [1.0, 2.0]])
    with pytest.warns(JitterWarning, match="added jitter 0.01"):
        f = whiten.cholesky(a, jitter=0.01)
    assert f.jitter == 0.01
    np.testing.assert_allclose(f.matrix(), a + 0.01 * np.eye(2), rtol=8 * np.finfo(float).eps)
    with contextlib.suppress(Exception), warnings.catch_warnings():
        warnings.simplefilter("error", JitterWarning)
        whiten.cholesky(a, jitter=0.0)  # nothing added: no warning


def test_catalogue_size():
    """Issue 14 asks for at least 80 cases across the command line and the API."""
    assert len(CLI) + len(API) >= 80
