"""Shrinkage estimates against the closed-form formulas of the two papers, written out here.

The estimator applies them to the standardized rows (target "D" of Schafer & Strimmer 2005: the
correlation shrunk towards the identity); :func:`_on_correlation_scale` does that with numpy and
maps the paper's estimate back with the ML standard deviations.
"""

from __future__ import annotations

import numpy as np
import pytest

import whiten

# small reference sets on purpose: the weak-screen notice is tested in tests/estimate/test_weak_screen_law.py
pytestmark = pytest.mark.filterwarnings("ignore::whiten.WeakScreenWarning")


def _rows(n, p, seed):
    rng = np.random.default_rng(seed)
    scales = np.linspace(0.5, 3.0, p)
    return rng.normal(size=(n, p)) * scales + rng.normal(size=p) * 10


def _ledoit_wolf_2004(x):
    """Ledoit & Wolf (2004), J. Multivariate Anal. 88: Lemmas 3.2-3.4 and Theorem 3.1, term by term.

    <A, B> = tr(A B^T) / p; m = <S, I>; d^2 = ||S - m I||^2; bbar^2 = n^-2 sum_k ||x_k x_k^T - S||^2;
    b^2 = min(bbar^2, d^2); a^2 = d^2 - b^2; S* = (b^2/d^2) m I + (a^2/d^2) S. Data demeaned, S = X^T X / n.
    """
    n, p = x.shape
    xc = x - x.mean(axis=0)
    s = xc.T @ xc / n
    ident = np.eye(p)
    inner = lambda a, b: np.trace(a @ b.T) / p  # noqa: E731 - the paper's normalized inner product
    m = inner(s, ident)
    d2 = inner(s - m * ident, s - m * ident)
    bbar2 = sum(inner(np.outer(r, r) - s, np.outer(r, r) - s) for r in xc) / n**2
    b2 = min(bbar2, d2)
    a2 = d2 - b2
    return b2 / d2, (b2 / d2) * m * ident + (a2 / d2) * s


def _oas_2010(x):
    """Chen, Wiesel, Eldar & Hero (2010), IEEE Trans. Signal Process. 58, eq. (23), with F = tr(S)/p I."""
    n, p = x.shape
    xc = x - x.mean(axis=0)
    s = xc.T @ xc / n
    tr_s, tr_s2 = np.trace(s), np.trace(s @ s)
    rho = min(((1 - 2 / p) * tr_s2 + tr_s**2) / ((n + 1 - 2 / p) * (tr_s2 - tr_s**2 / p)), 1.0)
    return rho, (1 - rho) * s + rho * tr_s / p * np.eye(p)


def _on_correlation_scale(rule, x):
    """Schafer & Strimmer (2005) target D: the rule on z = (x - mean) / sd_ML, then D est D."""
    xc = x - x.mean(axis=0)
    sd = np.sqrt((xc**2).mean(axis=0))
    delta, est = rule(xc / sd)
    return delta, est * np.outer(sd, sd)


@pytest.mark.parametrize("n,p", [(40, 5), (8, 12)])
def test_ledoit_wolf_matches_the_paper(n, p):
    x = _rows(n, p, seed=n + p)
    b = whiten.fit_baseline(x, estimator="shrinkage")
    delta, est = _on_correlation_scale(_ledoit_wolf_2004, x)
    assert b.params["shrinkage"] == "ledoit-wolf"
    assert b.params["intensity"] == pytest.approx(delta, rel=1e-10)
    np.testing.assert_allclose(b.cov, est, rtol=1e-10, atol=1e-12 * np.abs(est).max())
    assert b.health.jitter == 0.0 and b.n == n


@pytest.mark.parametrize("n,p", [(40, 5), (8, 12)])
def test_oas_matches_the_paper(n, p):
    x = _rows(n, p, seed=2 * n + p)
    b = whiten.fit_baseline(x, estimator="shrinkage", shrinkage="oas")
    rho, est = _on_correlation_scale(_oas_2010, x)
    assert b.params["intensity"] == pytest.approx(rho, rel=1e-10)
    np.testing.assert_allclose(b.cov, est, rtol=1e-10, atol=1e-12 * np.abs(est).max())


def test_shrinkage_streams_like_in_memory():
    x = _rows(300, 6, seed=5)
    a = whiten.fit_baseline(x, estimator="shrinkage")
    b = whiten.fit_baseline(iter([x[:100], x[100:250], x[250:]]), estimator="shrinkage")
    assert b.params["intensity"] == pytest.approx(a.params["intensity"], rel=1e-11)
    np.testing.assert_allclose(b.cov, a.cov, rtol=1e-11)


def test_shrinkage_options_are_checked():
    x = _rows(30, 3, seed=6)
    with pytest.raises(whiten.InputError, match="expected one of"):
        whiten.fit_baseline(x, estimator="shrinkage", shrinkage="half")
    with pytest.raises(whiten.InputError, match="weights: supported with estimator='sample' only"):
        whiten.fit_baseline(x, estimator="shrinkage", weights=np.ones(30))


def test_two_rows_ledoit_wolf_degenerate_oas_fine():
    x = _rows(2, 3, seed=9)
    # with 2 rows x_k x_k^T = S for both, so bbar^2 = 0 in Ledoit & Wolf (2004): no shrinkage, singular
    delta, _ = _ledoit_wolf_2004(x)
    assert delta == pytest.approx(0.0, abs=1e-12)
    with pytest.raises(whiten.InputError, match=r"intensity is 0 \(to rounding.* Use shrinkage='oas'"):
        whiten.fit_baseline(x, estimator="shrinkage")
    b = whiten.fit_baseline(x, estimator="shrinkage", shrinkage="oas")
    rho, est = _on_correlation_scale(_oas_2010, x)
    assert b.params["intensity"] == pytest.approx(rho, rel=1e-12)
    np.testing.assert_allclose(b.cov, est, rtol=1e-10)
