"""Explaining a tunnel kiln's energy use (invented regression scenario, fixed seed).

A tunnel kiln fires ceramic ware; once an hour its log records the gas energy
burnt and what might explain it. Two thermocouples sit in the same firing zone
a hand's width apart, so they read almost the same temperature: the
near-collinear pair that makes a plain least-squares fit fragile.

=============  =====  ===================================================
energy_kwh     kWh    gas energy burnt in the hour (the response)
zone_c_upper   °C     firing-zone temperature, upper thermocouple
zone_c_lower   °C     firing-zone temperature, lower thermocouple
push_rate      1/h    kiln cars pushed through per hour
load_t         t      ware on the cars in the hour
fan_rpm        rpm    exhaust fan speed
ambient_c      °C     outside air temperature
meter_weight   -      inverse variance of the energy reading (the meter was
                      swapped for a finer one part way through the log)
=============  =====  ===================================================

720 hourly rows (30 days). The energy follows a linear law in the zone
temperature, the load, the fan and the ambient temperature, plus noise; both
thermocouples carry the same temperature with a 0.3 K disagreement. The
numbers are made up for the demonstration; they describe no real kiln.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np

SEED = 20261203
ROWS = 720
DATA_FILE = "kiln_energy.csv"
RESPONSE = "energy_kwh"
PREDICTORS = ["zone_c_upper", "zone_c_lower", "push_rate", "load_t", "fan_rpm", "ambient_c"]
WEIGHTS = "meter_weight"

CAUTION = ("Caution: a regression describes the rows it was fitted on. Coefficients of nearly collinear "
           "columns are not separately determined, a good fit is not a causal account, and a prediction "
           "far from the fitted rows is an extrapolation; check the residuals before relying on it.")


def table(seed: int = SEED):
    """The invented hourly log as a DataFrame (deterministic for a given seed)."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    hour = np.arange(ROWS)
    zone = 1185.0 + 12.0 * np.sin(2 * np.pi * hour / 168.0) + 4.0 * rng.standard_normal(ROWS)
    push = np.clip(np.round(2.5 + 0.4 * rng.standard_normal(ROWS), 1), 1.5, 3.5)
    load = push * (1.9 + 0.15 * rng.standard_normal(ROWS))
    fan = 1400.0 + 60.0 * rng.standard_normal(ROWS) + 80.0 * (push - 2.5)
    ambient = 9.0 + 6.0 * np.sin(2 * np.pi * (hour - 14) / 24.0) + 1.5 * rng.standard_normal(ROWS)
    sigma = np.where(hour < ROWS // 3, 9.0, 4.0)       # the coarser meter first, then the finer one
    energy = (-2400.0 + 3.1 * zone + 210.0 * load + 0.45 * fan - 4.2 * ambient
              + sigma * rng.standard_normal(ROWS))
    return pd.DataFrame({
        "hour": hour,
        RESPONSE: np.round(energy, 1),
        "zone_c_upper": np.round(zone + 0.15 + 0.3 * rng.standard_normal(ROWS), 2),
        "zone_c_lower": np.round(zone - 0.15 + 0.3 * rng.standard_normal(ROWS), 2),
        "push_rate": push, "load_t": np.round(load, 3), "fan_rpm": np.round(fan, 1),
        "ambient_c": np.round(ambient, 2), WEIGHTS: np.round(1.0 / sigma ** 2, 6),
    })


def csv_text(seed: int = SEED) -> str:
    buf = io.StringIO()
    table(seed).to_csv(buf, index=False, lineterminator="\n")
    return buf.getvalue()


def _bundled() -> str:
    from importlib.resources import files

    return (files("whiten.demos") / "data" / DATA_FILE).read_text(encoding="utf-8")


def run(out: Path, *, force: bool = False) -> list[str]:
    """Fit the log by weighted least squares and by ridge, chart and report it, explain it.

    Writes into ``out``: ``kiln_energy.csv`` (the bundled data), ``kiln_fit.json``
    (the fit in the layout of ``whiten regress``) and ``kiln_fit.html`` (the
    regression report, charts embedded). Returns the
    lines of a plain-words account.
    """
    import json
    import warnings

    import pandas as pd

    import whiten

    from ..io.atomic import write_text
    from ..regression.fitfile import FIT_SCHEMA

    out = Path(out)
    text = _bundled()
    write_text(out / DATA_FILE, text, force=force, what="data")
    df = pd.read_csv(io.StringIO(text))
    x, y, w = df[PREDICTORS], df[RESPONSE], df[WEIGHTS]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", whiten.ConditioningWarning)
        fit = whiten.fit_linear(x, y, weights=w)
        ridge = whiten.fit_linear(x, y, weights=w, ridge="gcv", standardize=True)
    doc = {"schema": FIT_SCHEMA, "data": DATA_FILE, "response": RESPONSE, "predictors": PREDICTORS,
           "weights": WEIGHTS, "coverage": 0.95, "fit": fit.to_dict()}
    write_text(out / "kiln_fit.json", json.dumps(doc, indent=1, allow_nan=False) + "\n", force=force, what="fit")
    whiten.regression_report(fit, response=RESPONSE).write(out / "kiln_fit.html", force=force)

    tab = fit.to_frame()
    up, lo = tab.loc["zone_c_upper"], tab.loc["zone_c_lower"]
    both = float(up["coef"] + lo["coef"])
    vif_max = float(np.nanmax(fit.vif))
    assert ridge.ridge is not None  # a ridge fit always carries how its penalty was chosen
    r_up = ridge.coef[ridge.names.index("zone_c_upper")]
    r_lo = ridge.coef[ridge.names.index("zone_c_lower")]
    lines = [
        f"Weighted least squares of {RESPONSE} on {len(PREDICTORS)} columns over {fit.n_rows} hours "
        f"(the meter's inverse variance as row weight): {100 * fit.r_squared:.1f}% of the variation explained.",
        f"The two zone thermocouples are nearly the same column (VIF up to {vif_max:.0f}, scaled condition "
        f"number {fit.condition:.3g}): one by one their coefficients are uncertain "
        f"({up['coef']:+.2f} ± {up['std_error']:.2f} and {lo['coef']:+.2f} ± {lo['std_error']:.2f} kWh/K), "
        f"but together they are well determined: {both:.2f} kWh per K of zone temperature.",
    ]
    lines += [f"  {s}" for s in fit.collinearity.sentences[:2]]
    lines += [
        f"Digits: {fit.health.digits_solved:.1f} computed right for the data as given, "
        f"{fit.health.digits_trusted:.1f} survive a change in the data's last digit.",
        f"Ridge with the penalty chosen by GCV ({ridge.ridge.penalty:.3g}, standardized columns) shares the "
        f"zone effect between the two: {r_up:+.2f} and {r_lo:+.2f} kWh/K.",
        "Files: kiln_energy.csv, kiln_fit.json, kiln_fit.html. Try: whiten regress "
        f"kiln_energy.csv --response {RESPONSE} --weights {WEIGHTS} -o fit.json",
        CAUTION,
    ]
    return lines
