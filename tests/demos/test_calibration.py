"""The calibration demo: files, account lines, and that its fit finds the invented truth."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from whiten.demos import calibration
from whiten.errors import InputError


def test_demo_writes_files_and_account(tmp_path):
    lines = calibration.run(tmp_path)
    for name in ("calibration_fit.png", "calibration_residuals.png", "calibration_ellipse.png"):
        assert (tmp_path / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    data = pd.read_csv(tmp_path / "probe_step.csv")
    assert list(data.columns) == ["time_s", "reading_degC"] and len(data) == 121
    assert any("local codes and accredited practice" in line for line in lines)
    assert any("Profile-likelihood 95% interval" in line for line in lines)
    with pytest.raises(InputError, match="already exists"):
        calibration.run(tmp_path)
    assert calibration.run(tmp_path, force=True) == lines  # fixed seed: same account


def test_demo_fit_recovers_invented_values():
    import whiten

    t, y, cov = calibration.simulate()
    fit = whiten.calibrate(lambda th: calibration.response(th, t), [20.0, 1.0, 5.0], y, cov,
                           jacobian=lambda th: calibration.response_jac(th, t))
    truth = np.array([calibration.TRUE[p] for p in calibration.PARAMS])
    # simulation check (common practice): the invented values lie within 4 standard errors
    assert np.all(np.abs(fit.theta - truth) < 4 * fit.std_error)


def test_demo_jacobian_against_central_differences():
    t = np.linspace(0, 30, 25)
    th = np.array([21.0, 0.98, 7.0])
    h = 1e-6
    fd = np.column_stack([(calibration.response(th + h * e, t) - calibration.response(th - h * e, t)) / (2 * h)
                          for e in np.eye(3)])  # central differences (common practice)
    np.testing.assert_allclose(calibration.response_jac(th, t), fd, rtol=1e-7, atol=1e-7)
