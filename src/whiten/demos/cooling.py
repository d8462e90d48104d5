"""Monitoring a cooling-water loop (invented scenario, fixed seed).

A closed cooling-water loop: a pump drives water through a strainer, a
process heat exchanger with a load-following control valve, and back. Eight
sensors co-vary because three hidden drivers move them together -- pump
speed, process heat load and ambient (cooling-tower) temperature:

=============  =====  ===================================================
t_supply       °C     water temperature to the heat exchanger
t_return       °C     water temperature back from it
p_discharge    bar    pump discharge pressure
p_suction      bar    pump suction pressure
flow           m³/h   loop flow
pump_power     kW     pump motor power
valve_open     %      control-valve opening
dp_strainer    kPa    pressure drop across the suction strainer
=============  =====  ===================================================

Healthy period: 1500 rows, 5 minutes apart. Test period: 800 rows with

(a) rows 250-329: the flow reading falls by about 1.6 of its own standard
    deviations while pump power and pressures stay as they were -- every
    sensor is inside its usual range, but flow no longer agrees with the pump
    (a fouled flow meter, or water recirculating inside the pump);
(b) rows 480-699: the strainer pressure drop creeps up steadily (clogging),
    a plain drift that the sensor's own deviation shows too;
(c) about 2% of the test readings missing at random, and a logger outage
    (rows 560-562) with no reading at all.

The numbers are made up for the demonstration; they describe no real plant.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np

SENSORS = ["t_supply", "t_return", "p_discharge", "p_suction", "flow", "pump_power", "valve_open", "dp_strainer"]
SEED = 20261201
HEALTHY_ROWS = 1500
TEST_ROWS = 800
FAULT_ROWS = (250, 330)       # correlation break: flow reads low for the pump's state
DRIFT_ROWS = (480, 700)       # strainer clogging
OUTAGE_ROWS = (560, 563)      # logger outage: nothing recorded
DATA_FILES = ("cooling_healthy.csv", "cooling_test.csv")
_STEP_MIN = 5
EWMA_LAMBDA = 0.1             # smoothing weight of the drift statistic

CAUTION = ("Caution: this is a statistical screen, not a protective function. It points at rows and "
           "sensors worth a look; trips, interlocks and alarms stay with the plant's safety systems, "
           "and local codes and operating procedures take precedence.")


def _readings(rng: np.random.Generator, n: int) -> np.ndarray:
    speed = rng.standard_normal(n)    # pump speed deviation
    load = rng.standard_normal(n)     # process heat load
    ambient = rng.standard_normal(n)  # cooling-tower / ambient temperature
    e = rng.standard_normal((n, 8))
    t_supply = 18.0 + 1.2 * ambient + 0.20 * e[:, 0]
    t_return = 27.5 + 1.2 * ambient + 2.0 * load - 0.7 * speed + 0.25 * e[:, 1]
    p_discharge = 4.20 + 0.16 * speed + 0.025 * e[:, 2]
    p_suction = 1.30 - 0.04 * speed + 0.015 * e[:, 3]
    flow = 120.0 + 6.0 * speed + 1.0 * e[:, 4]
    pump_power = 22.0 + 1.8 * speed + 0.30 * e[:, 5]
    valve_open = 55.0 + 6.0 * load + 1.5 * e[:, 6]
    dp_strainer = 12.0 + 0.9 * speed + 0.40 * e[:, 7]
    return np.column_stack([t_supply, t_return, p_discharge, p_suction, flow, pump_power, valve_open, dp_strainer])


def make_data(seed: int = SEED):
    """The healthy and test tables as DataFrames with a ``time`` column (fixed seed)."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    healthy = _readings(rng, HEALTHY_ROWS)
    test = _readings(rng, TEST_ROWS)
    a, b = FAULT_ROWS
    test[a:b, SENSORS.index("flow")] -= 9.8  # about 1.6 sd of flow's healthy spread
    a, b = DRIFT_ROWS
    test[a:b, SENSORS.index("dp_strainer")] += np.linspace(0.0, 6.0, b - a)
    gone = rng.uniform(size=test.shape) < 0.02
    test[gone] = np.nan
    a, b = OUTAGE_ROWS
    test[a:b] = np.nan
    start = np.datetime64("2026-03-02T00:00")
    step = np.timedelta64(_STEP_MIN, "m")
    t_h = start + step * np.arange(HEALTHY_ROWS)
    t_t = t_h[-1] + step * np.arange(1, TEST_ROWS + 1)
    fmt = lambda t: np.datetime_as_string(t, unit="m")  # noqa: E731
    h = pd.DataFrame(np.round(healthy, 4), columns=SENSORS)
    h.insert(0, "time", fmt(t_h))
    t = pd.DataFrame(np.round(test, 4), columns=SENSORS)
    t.insert(0, "time", fmt(t_t))
    return h, t


def _csv_text(df) -> str:
    buf = io.StringIO()
    df.to_csv(buf, index=False, lineterminator="\n", float_format="%.4f")
    return buf.getvalue()


def write_data(folder: Path, *, force: bool = False, seed: int = SEED) -> list[Path]:
    """Write the two CSV files into ``folder`` (what demo/make_cooling_data.py calls)."""
    from ..io.atomic import write_text

    folder = Path(folder)
    h, t = make_data(seed)
    return [write_text(folder / name, _csv_text(df), force=force, what="data")
            for name, df in zip(DATA_FILES, (h, t))]


def _bundled(name: str) -> str:
    from importlib import resources

    return resources.files("whiten.demos").joinpath("data").joinpath(name).read_text(encoding="utf-8")


def _window(scores, rows: tuple[int, int]):
    return scores.iloc[rows[0]:rows[1]]


def _most_common(series) -> tuple[str, int]:
    vc = series[series != ""].value_counts()
    return (str(vc.index[0]), int(vc.iloc[0])) if len(vc) else ("", 0)


def run(out: Path, *, force: bool = False) -> list[str]:
    """Fit a baseline on the healthy period, score the test period, chart it, explain it.

    Writes into ``out``: the two data CSVs, ``cooling_baseline.json``,
    ``cooling_scores.csv`` (with the EWMA columns), ``cooling_distance.png``,
    ``cooling_ewma.png``, ``cooling_qq.png`` and ``cooling_contributions.png``.
    Returns the lines of a plain-words account.
    """
    import pandas as pd

    import whiten

    from ..io.atomic import write_text
    from ..monitor import charts, score

    out = Path(out)
    texts = {name: _bundled(name) for name in DATA_FILES}
    for name, text in texts.items():
        write_text(out / name, text, force=force, what="data")
    healthy = pd.read_csv(io.StringIO(texts[DATA_FILES[0]]), index_col="time")
    test = pd.read_csv(io.StringIO(texts[DATA_FILES[1]]), index_col="time")

    baseline = whiten.fit_baseline(healthy[SENSORS])
    baseline.save(out / "cooling_baseline.json", force=force)
    alpha = 0.001
    # the EWMA limit is set for an in-control run of 1 / alpha rows: the per-row screen's own rate
    s = score(baseline, test, alpha=alpha, fdr=0.01, ewma=EWMA_LAMBDA, ewma_arl=1.0 / alpha)
    buf = io.StringIO()
    s.to_csv(buf, lineterminator="\n")
    write_text(out / "cooling_scores.csv", buf.getvalue(), force=force, what="scores")
    ref = score(baseline, healthy, phase="reference")
    times = pd.to_datetime(test.index)
    charts.distance_chart(s, out / "cooling_distance.png", time=times, force=force,
                          title="Cooling loop, test period: squared Mahalanobis distance")
    charts.ewma_chart(s, out / "cooling_ewma.png", time=times, force=force,
                      title="Cooling loop, test period: multivariate EWMA statistic")
    charts.qq_chart(ref["d2"], len(SENSORS), out / "cooling_qq.png", force=force,
                    title="Cooling loop, healthy period: Q-Q check")
    worst = [s.loc[_window(s, FAULT_ROWS)["d2"].idxmax()], s.loc[_window(s, DRIFT_ROWS)["d2"].idxmax()]]
    pick = pd.DataFrame(worst)
    pick.attrs = dict(s.attrs)
    charts.contribution_chart(pick, out / "cooling_contributions.png", rows=2, force=force,
                              title="Worst row of each episode: d2 lost without each sensor (number: plain deviation)")

    n = len(s)
    lines = [
        f"Cooling-water loop (invented data): baseline from {baseline.n} healthy rows of {len(SENSORS)} sensors; "
        f"{n} test rows scored at alpha={alpha:g} (phase 'new', exact F limit).",
        f"  model health: about {baseline.factor.health.digits_trusted:.0f} digits trusted, "
        f"jitter {baseline.factor.health.jitter:g}; reference rows alarming against their own fit: "
        f"{int(ref['alarm'].sum())} of {len(ref)}.",
    ]
    quiet = pd.concat([s.iloc[:FAULT_ROWS[0]], s.iloc[FAULT_ROWS[1]:DRIFT_ROWS[0]], s.iloc[DRIFT_ROWS[1]:]])
    lines.append(f"  ordinary rows: {int(quiet['alarm'].sum())} alarms in {len(quiet)} "
                 f"(about {alpha * len(quiet):.1f} expected by chance).")

    fault = _window(s, FAULT_ROWS)
    who, k = _most_common(fault.loc[fault["alarm"], "top_contributor"])
    devs = np.abs(fault[[f"dev:{c}" for c in SENSORS]].to_numpy())
    inside = int(np.sum(fault["alarm"].to_numpy() & (np.nanmax(devs, axis=1) < 3.0)))
    dev_top = float(np.nanmedian(np.abs(fault[f"dev:{who}"]))) if who else float("nan")
    lines.append(
        f"  {fault.index[0]} to {fault.index[-1]}: {int(fault['alarm'].sum())} of {len(fault)} rows alarm; "
        f"top sensor '{who}' in {k} of them.")
    lines.append(
        f"    in {inside} of those alarms no sensor is beyond 3 sd on its own ('{who}' typically "
        f"{dev_top:.1f} sd off): '{who}' is not out of range, it no longer agrees with pump_power and the "
        "pressures -- the pattern of a fouled flow meter or water recirculating in the pump.")

    drift = _window(s, DRIFT_ROWS)
    who_d, k_d = _most_common(drift.loc[drift["alarm"], "top_contributor"])
    first = drift.index[drift["alarm"].to_numpy()][0] if drift["alarm"].any() else None
    end_dev = float(np.nanmean(drift[f"dev:{who_d}"].iloc[-20:])) if who_d else float("nan")
    lines.append(
        f"  {drift.index[0]} to {drift.index[-1]}: a slow rise; first alarm at {first}, "
        f"{int(drift['alarm'].sum())} of {len(drift)} rows alarm, top sensor '{who_d}' in {k_d}.")
    # the same alpha on the sensor alone: two-sided normal limit (scipy.stats.norm)
    from scipy.stats import norm

    z_lim = float(norm.isf(alpha / 2))
    alone = np.abs(drift[f"dev:{who_d}"].to_numpy()) > z_lim if who_d else np.zeros(len(drift), bool)
    first_alone = drift.index[alone][0] if alone.any() else "never in this period"
    lines.append(
        f"    '{who_d}' ends about {end_dev:+.1f} sd from normal on its own too: a plain drift (e.g. a "
        f"clogging strainer). A single-sensor limit at the same alpha (|dev| > {z_lim:.2f}) first fires "
        f"at {first_alone}.")

    ew = drift["ewma_alarm"].to_numpy()
    first_ew = drift.index[ew][0] if ew.any() else None
    rows_t2 = int(np.flatnonzero(drift["alarm"].to_numpy())[0]) if drift["alarm"].any() else None
    rows_ew = int(np.flatnonzero(ew)[0]) if ew.any() else None
    who_e, _ = _most_common(drift.loc[ew, "ewma_top"])
    info = s.attrs["ewma_limit"]
    lines.append(
        f"    drift statistic (multivariate EWMA, lambda {EWMA_LAMBDA:g}, limit {info['h']:.3g} set by simulation for "
        f"an in-control run of {info['arl']:g} rows = 1/alpha, the per-row screen's rate): first alarm at "
        f"{first_ew}, {rows_ew} rows into the drift against {rows_t2} for the per-row distance; "
        f"it names '{who_e}'.")
    quiet_ew = int(s["ewma_alarm"].iloc[:FAULT_ROWS[0]].sum())
    lines.append(
        f"    before the first episode the EWMA raises {quiet_ew} alarms in {FAULT_ROWS[0]} rows. Its limit "
        "assumes independent rows: readings that are autocorrelated (slow loops, filtered signals) "
        "shorten its run lengths, so check it on a healthy stretch of the plant's own data first.")
    partial = int(((s["n_observed"] > 0) & (s["n_observed"] < len(SENSORS))).sum())
    none = int((s["n_observed"] == 0).sum())
    lines.append(
        f"  missing readings: {partial} rows scored on the sensors they had (limit adjusted to the "
        f"number observed); {none} rows with no reading at all were kept, not scored, and noted.")
    lines.append(
        f"  batch view: Benjamini-Hochberg at FDR 0.01 flags {int(s['alarm_fdr'].sum())} rows "
        f"(per-row alarms: {int(s['alarm'].sum())}).")
    lines.append("  files: cooling_baseline.json, cooling_scores.csv, cooling_distance.png, "
                 "cooling_ewma.png, cooling_qq.png, cooling_contributions.png")
    lines.append(CAUTION)
    return lines
