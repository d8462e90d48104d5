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
]
