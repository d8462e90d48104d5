"""Bad-input cases of issue 20 (outputs by name, episodes, remembered settings, inspect), in the catalogue's
layout: (id, files {name: text}, argv, exit code, key words of stderr, files the run may create)."""

from __future__ import annotations

GOOD = "a,b,c\n0.1,0.2,0.3\n-0.4,0.5,0.1\n0.3,-0.2,0.4\n"

CLI = [
    ("score-output-unknown-ending", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.xlsx",
     1, ["-o 's.xlsx'", "cannot tell the output format", ".parquet"], []),
    ("score-output-no-ending", {"d.csv": GOOD}, "score d.csv --baseline m.json -o scores",
     1, ["cannot tell the output format"], []),
    ("loglik-output-unknown-ending", {"d.csv": GOOD}, "loglik d.csv --baseline m.json -o ll.json",
     1, ["cannot tell the output format"], []),
    ("score-rename-no-equals", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --rename a",
     1, ["--rename", "old=new"], []),
    ("score-rename-unknown-column", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --rename zz=a",
     1, ["no column 'zz'", "d.csv"], []),
    ("score-rename-collides", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --rename a=b",
     1, ["two columns named 'b'"], []),
    ("score-rename-leaves-mismatch", {"d.csv": "x,b,c\n1,2,3\n"}, "score d.csv --baseline m.json -o s.csv",
     1, ["missing columns ['a']", "extra columns ['x']", "--rename"], []),
    ("score-na-values-empty-code", {"d.csv": GOOD}, "score d.csv --baseline m.json -o s.csv --na-values=ERR,,x",
     1, ["--na-values", "comma-separated"], []),
    ("baseline-date-column", {"r.csv": "t,a\n2026-01-01 00:00,1\n2026-01-01 01:00,2\n"},
     "baseline r.csv -o m2.json", 1, ["column 't'", "line 2", "--index-column t"], []),
    ("inspect-a-csv-table", {"t.csv": "stamp,a,b\nt0,1,2\nt1,3,4\n"}, "inspect t.csv",
     1, ["'t.csv'", "looks like a CSV table of 3 columns", "header: stamp, a, b", "2 data line(s)",
         "whiten baseline t.csv"], []),
    ("inspect-a-tsv-table", {"t.tsv": "a\tb\n1\t2\n"}, "inspect t.tsv", 1, ["tab-separated table"], []),
    ("inspect-empty-file", {"e.json": ""}, "inspect e.json", 1, ["is empty (0 bytes)", "whiten baseline"], []),
    ("inspect-blank-file", {"e.json": "\n\n"}, "inspect e.json", 1, ["is empty (2 bytes, only blank space)"], []),
    ("inspect-json-list", {"l.json": "[1, 2]"}, "inspect l.json", 1, ["a JSON list", "not a whiten model"], []),
    ("score-baseline-is-csv", {"d.csv": GOOD}, "score d.csv --baseline d.csv -o s.csv",
     1, ["looks like a CSV table"], []),
]
