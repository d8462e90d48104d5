"""Calibration of the digits statements of whiten.gaussian_loglik against mpmath (60 digits).

Reference: mpmath (Johansson et al.) at 60 significant digits, from the exact double inputs (the
covariance's own inputs: a matrix, variances, U and d, the Kronecker factors, the blocks).
* actual accuracy (``solved_*``): log det S (mpmath Cholesky), r^T S^{-1} r and the log-likelihood
  computed exactly, compared with whiten's values;
* actual sensitivity (``trusted_*``): the exact first-order worst change over a change of one unit
  (eps relative) in every input, from ``d(log det S + chi2) = tr((S^{-1} - v v^T) dS) - 2 v^T dr`` with
  ``v = S^{-1} r``, differentiated through each structure's inputs in mpmath.
Rule (issue 13): the claim never exceeds the actual by more than 0.5 digit, and is within 1.5 digits of
it in at least 90% of the problems, for each of the six columns.
"""

from __future__ import annotations

import math
import warnings

import mpmath as mp
import numpy as np
import pytest

import whiten

EPS = 2.0 ** -52
CAP = -math.log10(EPS)
mp.mp.dps = 60


def _spd(rng, n, lc, spread=3.0):
    u, _ = np.linalg.qr(rng.standard_normal((n, n)))
    s = (u * np.logspace(0, -lc, n)) @ u.T
    sc = np.exp(rng.uniform(-spread, spread, n))
    s = s * sc[:, None] * sc[None, :]
    return (s + s.T) / 2


def _problems():
    rng = np.random.default_rng(20240614)
    out = []
    for lc in (2, 4, 6, 8, 10, 12, 14):
        for n in (6, 25):
            s = _spd(rng, n, lc)
            out.append((f"dense-cond1e{lc}-n{n}", ("dense", s), rng.standard_normal(n) * np.sqrt(np.diag(s))))
    for lc in (3, 7, 11, 13):
        s = _spd(rng, 40, lc, 1.0)
        out.append((f"dense-cond1e{lc}-n40", ("dense", s), rng.standard_normal(40) * np.sqrt(np.diag(s))))
    for rho in (0.9, 0.999, 0.99999):
        i = np.arange(30)
        s = 4.0 * rho ** np.abs(i[:, None] - i[None, :])
        out.append((f"dense-ar1-{rho:g}", ("dense", s), 2.0 * rng.standard_normal(30)))
    for k in range(3):
        d = np.exp(rng.uniform(-20, 20, 20))
        out.append((f"diagonal-{k}", ("diag", d), rng.standard_normal(20) * np.sqrt(d)))
    for big in (1.0, 1e3, 1e6, 1e-3):
        u = rng.standard_normal((20, 3)) * big
        d = rng.uniform(0.5, 2.0, 20)
        out.append((f"lowrank-{big:g}", ("lowrank", u, d), rng.standard_normal(20) * big))
    for lc in (2, 6, 10):
        out.append((f"blocks-cond1e{lc}", ("blocks", [_spd(rng, 4, lc), _spd(rng, 7, lc / 2), _spd(rng, 5, 1)]),
                    rng.standard_normal(16)))
    for lc in (2, 5, 8):
        a, b = _spd(rng, 4, lc, 1.0), _spd(rng, 5, lc / 2, 1.0)
        out.append((f"kronecker-cond1e{lc}", ("kron", a, b), rng.standard_normal(20)))
    for lc in (3, 9, 13):
        out.append((f"stack-cond1e{lc}", ("stack", np.stack([_spd(rng, 8, lc), _spd(rng, 8, lc / 3)])),
                    rng.standard_normal((2, 8))))
    for scale in (1e-150, 1e150):
        s = _spd(rng, 10, 5, 0.0) * scale
        out.append((f"dense-scaled-{scale:g}", ("dense", s), rng.standard_normal(10) * math.sqrt(scale)))
    return out


def _m(a):
    a = np.atleast_2d(a)
    return mp.matrix([[mp.mpf(float(x)) for x in row] for row in a])


def _cov_object(spec):
    kind = spec[0]
    if kind == "dense":
        return spec[1]
    if kind == "diag":
        return whiten.diagonal(spec[1])
    if kind == "lowrank":
        return whiten.low_rank_plus_diagonal(spec[1], spec[2])
    if kind == "blocks":
        return whiten.block_diagonal(spec[1])
    return whiten.kronecker(spec[1], spec[2])


def _dense_mp(spec):
    kind = spec[0]
    if kind == "dense":
        return _m(spec[1])
    if kind == "diag":
        return mp.diag([mp.mpf(float(x)) for x in spec[1]])
    if kind == "lowrank":
        u = _m(spec[1])
        return u * u.T + mp.diag([mp.mpf(float(x)) for x in spec[2]])
    if kind == "blocks":
        n = sum(b.shape[0] for b in spec[1])
        out = mp.zeros(n, n)
        o = 0
        for b in spec[1]:
            for i in range(b.shape[0]):
                for j in range(b.shape[0]):
                    out[o + i, o + j] = mp.mpf(float(b[i, j]))
            o += b.shape[0]
        return out
    a, b = _m(spec[1]), _m(spec[2])
    na, nb = a.rows, b.rows
    out = mp.zeros(na * nb, na * nb)
    for i in range(na):
        for k in range(na):
            for j in range(nb):
                for m_ in range(nb):
                    out[i * nb + j, k * nb + m_] = a[i, k] * b[j, m_]
    return out


def _struct_sens(spec, K, S):
    """Worst first-order |tr(K dS)| over a relative eps change of each input of the structure (per eps)."""
    kind = spec[0]
    n = S.rows
    if kind in ("dense", "blocks"):
        return mp.fsum(abs(K[i, j] * S[i, j]) for i in range(n) for j in range(n) if S[i, j] != 0)
    if kind == "diag":
        return mp.fsum(abs(K[i, i] * S[i, i]) for i in range(n))
    if kind == "lowrank":
        u = _m(spec[1])
        ku = K * u
        t = 2 * mp.fsum(abs(ku[i, k] * u[i, k]) for i in range(n) for k in range(u.cols))
        return t + mp.fsum(abs(K[i, i] * mp.mpf(float(spec[2][i]))) for i in range(n))
    a, b = _m(spec[1]), _m(spec[2])
    na, nb = a.rows, b.rows
    t = mp.mpf(0)
    for i in range(na):
        for k in range(na):
            g = mp.fsum(K[i * nb + j, k * nb + m_] * b[j, m_] for j in range(nb) for m_ in range(nb))
            t += abs(g * a[i, k])
    for j in range(nb):
        for m_ in range(nb):
            g = mp.fsum(K[i * nb + j, k * nb + m_] * a[i, k] for i in range(na) for k in range(na))
            t += abs(g * b[j, m_])
    return t


def _reference(spec, r):
    S = _dense_mp(spec)
    n = S.rows
    R = mp.matrix([mp.mpf(float(x)) for x in r])
    L = mp.cholesky(S, tol=mp.mpf('1e-1000'))
    ld = 2 * mp.fsum(mp.log(L[i, i]) for i in range(n))
    W = S ** -1
    v = W * R
    q = mp.fsum(v[i] * R[i] for i in range(n))
    ll = -(n * mp.log(2 * mp.pi) + ld + q) / 2
    vr = 2 * mp.fsum(abs(v[i] * R[i]) for i in range(n))
    vv = v * v.T
    s_ld = _struct_sens(spec, W, S)
    s_q = _struct_sens(spec, vv, S) + vr
    s_ll = (_struct_sens(spec, W - vv, S) + vr) / 2
    return (ld, q, ll), (s_ld, s_q, s_ll)


def _dig(err, val):
    err, val = abs(float(err)), abs(float(val))
    if err == 0:
        return CAP
    return min(CAP, max(0.0, math.log10(val) - math.log10(err)))


def _rows():
    rows = []
    for name, spec, r in _problems():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if spec[0] == "stack":
                res = whiten.gaussian_loglik(r, spec[1], return_details=True)
                items = [(("dense", spec[1][i]), r[i], i) for i in range(spec[1].shape[0])]
            else:
                res = whiten.gaussian_loglik(r, _cov_object(spec), return_details=True)
                items = [(spec, r, None)]
        for sp, rr, i in items:
            exact, sens = _reference(sp, rr)
            got = [res.logdet, res.chi2, res.loglik]
            dg = res.digits
            def pick(x, i=i):
                return float(x) if i is None else float(np.asarray(x)[i])
            claim_t = [pick(dg.trusted_logdet), pick(dg.trusted_chi2), pick(dg.trusted_loglik)]
            claim_s = [pick(dg.solved_logdet), pick(dg.solved_chi2), pick(dg.solved_loglik)]
            act_s = [_dig(mp.mpf(pick(g)) - e, e) for g, e in zip(got, exact)]
            act_t = [_dig(EPS * s, e) for s, e in zip(sens, exact)]
            rows.append((name + ("" if i is None else f"[{i}]"), claim_s, act_s, claim_t, act_t))
    return rows


@pytest.mark.slow
def test_likelihood_digits_calibration():
    rows = _rows()
    head = "{:<24}" + " {:>11}" * 6
    print("\n" + head.format("problem", "ld solved", "chi2 solved", "ll solved", "ld trusted", "chi2 trust",
                             "ll trusted"))
    for name, cs, as_, ct, at in rows:
        print(f"{name:<24}" + "".join(f" {c:5.1f}/{a:5.1f}" for c, a in zip(cs + ct, as_ + at)))
    assert len(rows) >= 40
    for stmt, (ci, ai) in {"solved": (1, 2), "trusted": (3, 4)}.items():
        for q, qn in enumerate(("logdet", "chi2", "loglik")):
            over = [(r[0], r[ci][q], r[ai][q]) for r in rows if r[ci][q] > r[ai][q] + 0.5]
            assert not over, f"{stmt} {qn}: claims above the actual digits by more than 0.5: {over}"
            close = sum(abs(r[ci][q] - r[ai][q]) <= 1.5 for r in rows)
            assert close >= 0.9 * len(rows), f"{stmt} {qn}: only {close} of {len(rows)} within 1.5 digits"
