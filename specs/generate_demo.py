#!/usr/bin/env python3
"""Generate the invented demo data of relspan: the Vessmoor coast.

Vessmoor is an invented coastal region with one harbour town, Port Caddren.
Nothing here describes a real place, organisation, person or statistic. The
script writes three quarterly tables (1990Q1 to 2025Q4, 144 quarters, time
column ``quarter`` in the form ``1990Q1``) and the true structure behind them:

``trio.csv``
    Three harbour indicators driven by one common factor (the harbour's trade
    cycle) - cargo handled, rail freight out of the harbour, customs receipts -
    and a fourth series with a cycle of its own, the kelp harvest of the outer
    reefs. Among the four variables exactly two linear relations hold (true
    corank 2), both among the first three. Measurement noise drifts: rail
    counts improve (axle counters replace paper waybills), customs
    attribution worsens (the free-port reform). The elementary regression of
    cargo on the others therefore wanders *along* the true relation plane,
    and one of its coefficients changes sign between 10-year windows while
    the plane itself stays put.
``accounts.csv``
    The region's output index is, by construction of the accounts, a fixed
    weighted sum of three sector indices (fisheries, shipping, tourism); all
    four are published with independent errors. One relation holds, and the
    diagonal-noise (Frisch) bounds on its coefficients are finite: every
    elementary regression lies in one orthant.
``shift.csv``
    Ferry fares follow fuel costs and crew wages through a fare formula that
    the (invented) Vessmoor Ferry Board changed on 2008-01-01: before, fares
    tracked fuel; after, mostly wages. One relation holds within each period,
    and the relation before and after differ by a clear angle.

``truth.json`` records, per dataset, the variables, the true corank, a basis
of the true relation subspace (on the raw scale of the columns and on the
standardised scale of the noise-free series), the noise standard deviations
(absolute and relative to the signal's), the break date and angle, the
design checks measured on the generated data, and the seed.

Output is deterministic to the byte: numpy's ``Generator`` (PCG64) gives the
same stream on every platform, and every float is written with a fixed
format (``%.3f`` in the tables, ``%.6f`` in ``truth.json``).

Usage::

    python specs/generate_demo.py [--out DIR] [--seed N]

The default ``--out`` is the ``data/`` folder beside this script. Files are
written to a temporary folder first and moved into place only when every
file and every design check succeeded, so a failed run leaves nothing
half-written.

References
----------
.. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, 1934.
.. [2] S. Klepper and E. E. Leamer, Consistent Sets of Estimates for
       Regressions with Errors in All Variables, Econometrica 52, 1984.
.. [3] A. Bjorck and G. H. Golub, Numerical Methods for Computing Angles
       between Linear Subspaces, Mathematics of Computation 27, 1973.
.. [4] C. Eckart and G. Young, The Approximation of One Matrix by Another
       of Lower Rank, Psychometrika 1, 1936.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

#: the seed of the committed demo data. Every design property below holds for
#: most seeds except the sign change in ``trio``, which shows up for about one
#: seed in four. 58 was chosen from seeds 1..200 by running the design checks
#: (``_check_trio``): it shows the change in both places the design puts it -
#: rail's coefficient in the early windows, while rail counts were noisy, and
#: customs' in the last window, once customs attribution had become noisy.
SEED = 58

FIRST_YEAR = 1990
LAST_YEAR = 2025
N_ROWS = 4 * (LAST_YEAR - FIRST_YEAR + 1)  # 144 quarters
BREAK_QUARTER = "2008Q1"
BREAK_ROW = 4 * (2008 - FIRST_YEAR)  # row index of 2008Q1 (72)

#: rolling window of the design checks: 10 years = 40 quarters, step 2 years = 8
ROLL_WIDTH = 40
ROLL_STEP = 8

#: design limits the generated data must meet (checked, not assumed)
MAX_ROLLING_PLANE_ANGLE_DEG = 6.0  # trio: well under the demo's 10-degree threshold
MAX_SMALL_EIGENVALUE = 0.035  # correlation scale; the demo's tolerance is 0.05
MIN_SIGNAL_EIGENVALUE = 0.25  # correlation scale; keeps the corank decision clear
MIN_BREAK_ANGLE_DEG = 20.0

FLOAT_TABLE = "%.3f"
FLOAT_TRUTH = "%.6f"


class DesignError(RuntimeError):
    """The generated data miss a property the demo relies on."""


@dataclass(frozen=True, slots=True)
class Table:
    """One generated table: its file name, columns, values and truth record."""

    name: str
    columns: tuple[str, ...]
    values: np.ndarray  # (N_ROWS, n) observed values
    truth: dict


# ---------------------------------------------------------------- helpers


def quarter_labels(n_rows: int = N_ROWS, first_year: int = FIRST_YEAR) -> list[str]:
    """Quarter labels ``1990Q1``, ``1990Q2``, ... for ``n_rows`` quarters."""
    return [f"{first_year + i // 4}Q{i % 4 + 1}" for i in range(n_rows)]


def _ar1(rng: np.random.Generator, phi: float, n: int, burn: int = 200) -> np.ndarray:
    """Stationary AR(1) path with unit variance (burn-in discarded)."""
    shocks = rng.standard_normal(n + burn) * np.sqrt(1.0 - phi * phi)
    x = np.empty(n + burn)
    x[0] = rng.standard_normal()
    for t in range(1, n + burn):
        x[t] = phi * x[t - 1] + shocks[t]
    return x[burn:]


def _cycle(rng: np.random.Generator, period_quarters: float, n: int, phi: float,
           share: float) -> np.ndarray:
    """A unit-variance driver: a sine cycle of the given period plus AR(1) noise.

    ``share`` is the share of the variance carried by the cycle. The cycle
    keeps the signal's variance within a 10-year window close to its
    variance over the whole sample, so window results stay comparable.
    """
    phase = rng.uniform(0.0, 2.0 * np.pi)
    t = np.arange(n)
    wave = np.sqrt(2.0) * np.sin(2.0 * np.pi * t / period_quarters + phase)
    return np.sqrt(share) * wave + np.sqrt(1.0 - share) * _ar1(rng, phi, n)


def as_written(x: np.ndarray) -> np.ndarray:
    """The values exactly as the CSV holds them (``%.3f``), so checks see the published data."""
    return np.array([[float(FLOAT_TABLE % v) for v in row] for row in np.atleast_2d(x)])


def _standardised(x: np.ndarray) -> np.ndarray:
    return (x - x.mean(axis=0)) / x.std(axis=0, ddof=1)


def tls_subspace(x: np.ndarray, q: int) -> tuple[np.ndarray, np.ndarray]:
    """Equal-noise (total least squares) relation subspace of standardised data.

    Returns the (q, n) orthonormal rows spanning the eigenvectors of the q
    smallest eigenvalues of the correlation matrix, and all eigenvalues in
    ascending order (Eckart & Young 1936).
    """
    corr = np.cov(_standardised(x), rowvar=False)
    w, v = np.linalg.eigh(corr)
    return v[:, :q].T, w


def principal_angles_deg(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Principal angles in degrees between the row spaces of ``a`` and ``b``.

    Sines from ``(I - Qa Qa^T) Qb`` and cosines from ``Qa^T Qb`` combined with
    atan2, which keeps small angles accurate (Bjorck & Golub 1973).
    """
    qa, _ = np.linalg.qr(np.atleast_2d(a).T)
    qb, _ = np.linalg.qr(np.atleast_2d(b).T)
    if qa.shape[1] != qb.shape[1]:
        raise ValueError("principal_angles_deg needs subspaces of equal dimension")
    cos = np.linalg.svd(qa.T @ qb, compute_uv=False)  # descending: smallest angle first
    sin = np.linalg.svd(qb - qa @ (qa.T @ qb), compute_uv=False)[::-1]  # ascending
    return np.degrees(np.arctan2(sin, cos))


def elementary_relation(cov: np.ndarray, j: int, normalise_on: int) -> np.ndarray:
    """Row j of inv(cov) scaled so entry ``normalise_on`` is 1 (Frisch 1934)."""
    row = np.linalg.inv(cov)[j]
    return row / row[normalise_on]


def one_orthant(cov: np.ndarray) -> bool:
    """Whether inv(cov) can be signed elementwise positive: every P_ij P_jk P_ki > 0.

    This is the condition under which the diagonal-noise (Frisch) solution set
    of a single relation is the bounded convex hull of the elementary
    regressions (Klepper & Leamer 1984).
    """
    p = np.linalg.inv(cov)
    n = p.shape[0]
    return all(p[i, j] * p[j, k] * p[k, i] > 0
               for i in range(n) for j in range(i + 1, n) for k in range(j + 1, n))


def reduced_form(rows: np.ndarray) -> np.ndarray:
    """Rows spanning the same space, solved for the first q variables: ``[I | -B]``."""
    rows = np.atleast_2d(rows)
    q = rows.shape[0]
    return np.linalg.solve(rows[:, :q], rows)


def rolling_starts(n_rows: int = N_ROWS, width: int = ROLL_WIDTH, step: int = ROLL_STEP) -> list[int]:
    return list(range(0, n_rows - width + 1, step))


# --------------------------------------------------------------- datasets


def make_trio(rng: np.random.Generator) -> Table:
    """Three co-moving harbour indicators plus an unrelated fourth series."""
    n = N_ROWS
    columns = ("cargo", "rail", "customs", "kelp")
    trade = _cycle(rng, period_quarters=26.0, n=n, phi=0.7, share=0.5)  # the common factor
    reef = _cycle(rng, period_quarters=19.0, n=n, phi=0.7, share=0.5)  # kelp's own driver
    level = np.array([2400.0, 850.0, 120.0, 60.0])
    loading = np.array([300.0, 90.0, 15.0, 8.0])  # signal sd of each series (driver sd is 1)
    drivers = np.column_stack([trade, trade, trade, reef])
    signal = drivers * loading
    # noise sd relative to the signal's sd: cargo and kelp constant at 10%;
    # rail falls from 14% to 4% (axle counters), customs rises from 4% to 14%
    ramp = np.linspace(0.0, 1.0, n)
    rel_start = np.array([0.10, 0.14, 0.04, 0.10])
    rel_end = np.array([0.10, 0.04, 0.14, 0.10])
    rel = rel_start + np.outer(ramp, rel_end - rel_start)
    noise = rng.standard_normal((n, 4)) * rel * loading
    clean = level + signal
    observed = as_written(clean + noise)

    # true relations (raw scale): cargo/300 = rail/90 = customs/15 up to levels
    raw = reduced_form(np.array([[1.0, 0.0, -loading[0] / loading[2], 0.0],
                                 [0.0, 1.0, -loading[1] / loading[2], 0.0]]))
    clean_sd = clean.std(axis=0, ddof=1)
    truth = _truth_common(columns, corank=2, raw=raw, clean_sd=clean_sd, noise=noise,
                          clean=clean)
    truth.update({
        "description": "cargo, rail and customs follow one trade cycle; kelp follows a reef "
                       "cycle of its own. Two relations hold, both among cargo, rail and customs.",
        "levels": level.tolist(),
        "signal_sd": loading.tolist(),
        "noise_sd_relative": {"start": rel_start.tolist(), "end": rel_end.tolist(),
                              "mean": rel.mean(axis=0).tolist(),
                              "shape": "linear in time from 1990Q1 (start) to 2025Q4 (end)"},
        "noise_sd": {"start": (rel_start * loading).tolist(), "end": (rel_end * loading).tolist()},
    })
    truth["design"] = _check_trio(observed, raw, columns)
    return Table("trio", columns, observed, truth)


def make_accounts(rng: np.random.Generator) -> Table:
    """An output index that is a weighted sum of three sector indices, all measured with error."""
    n = N_ROWS
    columns = ("output", "fisheries", "shipping", "tourism")
    weights = np.array([0.45, 0.35, 0.20])
    common = _cycle(rng, period_quarters=30.0, n=n, phi=0.8, share=0.5)
    own = np.column_stack([_cycle(rng, period_quarters=p, n=n, phi=0.6, share=0.4)
                           for p in (17.0, 23.0, 12.0)])
    sector_sd = np.array([9.0, 7.0, 12.0])
    sectors = 100.0 + sector_sd * (0.5 * common[:, None] + np.sqrt(0.75) * own)
    output = sectors @ weights  # the accounting identity, exact for the noise-free series
    clean = np.column_stack([output, sectors])
    clean_sd = clean.std(axis=0, ddof=1)
    # independent publication errors, constant over time: 10% of each series' signal sd
    rel = np.full(4, 0.10)
    design_sd = np.concatenate([[np.sqrt(np.sum((weights * sector_sd) ** 2)
                                         + 2 * 0.25 * sum(weights[i] * weights[j] * sector_sd[i]
                                                          * sector_sd[j]
                                                          for i in range(3) for j in range(i + 1, 3)))],
                                sector_sd])
    noise_sd = rel * design_sd
    noise = rng.standard_normal((n, 4)) * noise_sd
    observed = as_written(clean + noise)
    raw = np.array([[1.0, -weights[0], -weights[1], -weights[2]]])
    truth = _truth_common(columns, corank=1, raw=raw, clean_sd=clean_sd, noise=noise,
                          clean=clean)
    truth.update({
        "description": "output = 0.45 fisheries + 0.35 shipping + 0.20 tourism for the "
                       "noise-free series; all four are published with independent errors.",
        "coefficients": {"normalise_on": "output",
                         "equation": "output = 0.45 fisheries + 0.35 shipping + 0.20 tourism",
                         "values": {"fisheries": weights[0], "shipping": weights[1],
                                    "tourism": weights[2]}},
        "signal_sd": design_sd.tolist(),
        "noise_sd": noise_sd.tolist(),
        "noise_sd_relative": rel.tolist(),
        "noise_share": (noise_sd ** 2 / noise_sd[0] ** 2).tolist(),
    })
    truth["design"] = _check_accounts(observed, weights)
    return Table("accounts", columns, observed, truth)


def make_shift(rng: np.random.Generator) -> Table:
    """Ferry fares set by a formula in fuel and wages that changes on 2008-01-01."""
    n = N_ROWS
    columns = ("fares", "fuel", "wages")
    fuel = 100.0 + 15.0 * _cycle(rng, period_quarters=22.0, n=n, phi=0.75, share=0.5)
    wages = 100.0 + 6.0 * _cycle(rng, period_quarters=34.0, n=n, phi=0.75, share=0.5)
    before = np.array([0.60, 1.20])  # fares per unit of (fuel, wages), 1990Q1-2007Q4
    after = np.array([0.15, 2.00])  # 2008Q1-2025Q4
    x = np.column_stack([fuel - 100.0, wages - 100.0])
    coef = np.where((np.arange(n) < BREAK_ROW)[:, None], before, after)
    fares = 100.0 + np.sum(coef * x, axis=1)
    clean = np.column_stack([fares, fuel, wages])
    rel = np.full(3, 0.10)
    periods = ((slice(0, BREAK_ROW), before, "1990Q1", "2007Q4", "1990-01-01", "2007-12-31"),
               (slice(BREAK_ROW, n), after, "2008Q1", "2025Q4", "2008-01-01", "2025-12-31"))
    # noise sd: 10% of the signal sd of each series within each period
    noise_sd = np.zeros((n, 3))
    period_records = []
    raws = []
    for rows, b, q_from, q_to, iso_from, iso_to in periods:
        sd = clean[rows].std(axis=0, ddof=1)
        noise_sd[rows] = rel * sd
        raw = np.array([[1.0, -b[0], -b[1]]])
        raws.append(raw)
        std_rows = reduced_form(raw * sd)
        period_records.append({
            "from": q_from, "to": q_to, "from_date": iso_from, "to_date": iso_to,
            "relations_raw": raw.tolist(),
            "relations_standardised": std_rows.tolist(),
            "signal_sd": sd.tolist(),
            "noise_sd": (rel * sd).tolist(),
        })
    noise = rng.standard_normal((n, 3)) * noise_sd
    observed = as_written(clean + noise)
    full_sd = clean.std(axis=0, ddof=1)
    angle = {
        "raw": float(principal_angles_deg(raws[0], raws[1]).max()),
        "standardised_common": float(principal_angles_deg(raws[0] * full_sd,
                                                          raws[1] * full_sd).max()),
        "standardised_within": float(principal_angles_deg(
            np.array(period_records[0]["relations_standardised"]),
            np.array(period_records[1]["relations_standardised"])).max()),
    }
    truth = {
        "variables": list(columns),
        "corank": 1,
        "corank_note": "one relation within each period; none holds over the full sample",
        "description": "fares = 100 + 0.60 (fuel - 100) + 1.20 (wages - 100) before 2008Q1 and "
                       "fares = 100 + 0.15 (fuel - 100) + 2.00 (wages - 100) from 2008Q1 on.",
        "periods": period_records,
        "break": {"quarter": BREAK_QUARTER, "date": "2008-01-01", "row": BREAK_ROW,
                  "angle_deg": angle,
                  "angle_note": "largest principal angle between the before and after relation: "
                                "raw = on the raw columns; standardised_common = columns scaled "
                                "by the full-sample sd of the noise-free series; "
                                "standardised_within = each period scaled by its own sd"},
        "noise_sd_relative": rel.tolist(),
        "noise_sd_relative_note": "10% of each series' signal sd within each period",
        "clean_sd": full_sd.tolist(),
        "noise_sd_measured_relative": (noise.std(axis=0, ddof=1) / full_sd).tolist(),
    }
    truth["design"] = _check_shift(observed, angle)
    return Table("shift", columns, observed, truth)


def _truth_common(columns: tuple[str, ...], *, corank: int, raw: np.ndarray, clean_sd: np.ndarray,
                  noise: np.ndarray, clean: np.ndarray) -> dict:
    resid = clean - clean.mean(axis=0)
    exactness = float(np.abs(resid @ raw.T).max())  # 0 up to rounding: relations hold exactly
    if exactness > 1e-8 * float(np.abs(resid).max()):
        raise DesignError(f"the recorded relations do not hold for the noise-free series "
                          f"(largest residual {exactness:g})")
    return {
        "variables": list(columns),
        "corank": corank,
        "relations_raw": raw.tolist(),
        "relations_standardised": reduced_form(raw * clean_sd).tolist(),
        "relations_note": "rows span the true relation subspace, solved for the first "
                          "variables ([I | -B]); raw = on the columns as written, standardised = "
                          "on the columns divided by the full-sample sd of the noise-free series",
        "clean_sd": clean_sd.tolist(),
        "noise_sd_measured_relative": (noise.std(axis=0, ddof=1) / clean_sd).tolist(),
    }


# ----------------------------------------------------------- design checks


def _check_trio(x: np.ndarray, raw: np.ndarray, columns: tuple[str, ...]) -> dict:
    full, _ = tls_subspace(x, 2)
    angles, small, signal, signs = [], [], [], []
    for s in rolling_starts():
        w = x[s:s + ROLL_WIDTH]
        sub, eig = tls_subspace(w, 2)
        angles.append(float(principal_angles_deg(sub, full).max()))
        small.append(float(eig[1]))
        signal.append(float(eig[2]))
        rel = elementary_relation(np.cov(_standardised(w), rowvar=False), 0, 0)
        signs.append(np.sign(rel[1:3]))
    signs_arr = np.array(signs)
    flips = [columns[1 + k] for k in range(2) if len(set(signs_arr[:, k])) > 1]
    truth_angle = float(principal_angles_deg(full, reduced_form(raw * x.std(axis=0, ddof=1))).max())
    if max(angles) > MAX_ROLLING_PLANE_ANGLE_DEG:
        raise DesignError(f"trio: the relation plane of a rolling window is {max(angles):.2f} "
                          f"degrees from the full sample's (limit {MAX_ROLLING_PLANE_ANGLE_DEG})")
    if max(small) > MAX_SMALL_EIGENVALUE or min(signal) < MIN_SIGNAL_EIGENVALUE:
        raise DesignError("trio: the corank-2 gap in the rolling windows is not clear "
                          f"(largest 2nd eigenvalue {max(small):.4f}, smallest 3rd {min(signal):.4f})")
    if not flips:
        raise DesignError("trio: no coefficient of the elementary regression of cargo changes "
                          "sign across rolling windows; choose another seed")
    # the variable to show: the one whose sign differs in the most windows
    counts = {columns[1 + k]: int(min(np.sum(signs_arr[:, k] > 0), np.sum(signs_arr[:, k] < 0)))
              for k in range(2)}
    variable = max(flips, key=lambda v: (counts[v], v))
    return {
        "rolling": {"width_rows": ROLL_WIDTH, "step_rows": ROLL_STEP,
                    "starts": [quarter_labels()[s] for s in rolling_starts()]},
        "max_rolling_plane_angle_deg": max(angles),
        "full_sample_angle_to_truth_deg": truth_angle,
        "largest_small_eigenvalue": max(small),
        "smallest_signal_eigenvalue": min(signal),
        "sign_change": {
            "relation": "elementary regression of cargo on the others, normalised on cargo "
                        "(row of inv(S) scaled so the cargo entry is 1), standardised columns",
            "normalise_on": "cargo",
            "variable": variable,
            "variables_that_change_sign": flips,
            "signs": {columns[1 + i]: [int(v) for v in signs_arr[:, i]] for i in range(2)},
        },
    }


def _check_accounts(x: np.ndarray, weights: np.ndarray) -> dict:
    cov = np.cov(x, rowvar=False)
    if not one_orthant(cov):
        raise DesignError("accounts: inv(S) of the full sample cannot be signed positive")
    rolling_ok = [one_orthant(np.cov(x[s:s + ROLL_WIDTH], rowvar=False)) for s in rolling_starts()]
    # the elementary regressions normalised on output, coefficients as in output = b . parts
    points = np.array([-elementary_relation(cov, j, 0)[1:] for j in range(4)])
    lo, hi = points.min(axis=0), points.max(axis=0)
    if not np.all((lo <= weights) & (weights <= hi)):
        raise DesignError("accounts: a true weight lies outside the elementary-regression bounds")
    return {
        "one_orthant_full": True,
        "one_orthant_every_rolling_window": bool(all(rolling_ok)),
        "elementary_bounds_full": {"low": lo.tolist(), "high": hi.tolist(),
                                   "variables": ["fisheries", "shipping", "tourism"]},
    }


def _check_shift(x: np.ndarray, true_angle: dict) -> dict:
    before, eig_b = tls_subspace(x[:BREAK_ROW], 1)
    after, eig_a = tls_subspace(x[BREAK_ROW:], 1)
    measured = float(principal_angles_deg(before, after).max())
    # the same relations on the common scale: back to data units (divide by each
    # period's sd), then scaled by the full-sample sd
    sd_b, sd_a, sd_full = (x[r].std(axis=0, ddof=1)
                           for r in (slice(0, BREAK_ROW), slice(BREAK_ROW, None), slice(None)))
    common = float(principal_angles_deg(before / sd_b * sd_full, after / sd_a * sd_full).max())
    if min(measured, common) < MIN_BREAK_ANGLE_DEG:
        raise DesignError(f"shift: the measured break angle ({measured:.2f}, common scale "
                          f"{common:.2f}) is below {MIN_BREAK_ANGLE_DEG} degrees")
    for label, eig in (("before", eig_b), ("after", eig_a)):
        if eig[0] > MAX_SMALL_EIGENVALUE or eig[1] < MIN_SIGNAL_EIGENVALUE:
            raise DesignError(f"shift: the corank-1 gap {label} the break is not clear")
    _, eig_full = tls_subspace(x, 1)
    return {"measured_break_angle_deg": {"standardised_within": measured,
                                         "standardised_common": common},
            "true_break_angle_deg": {"standardised_within": true_angle["standardised_within"],
                                     "standardised_common": true_angle["standardised_common"]},
            "smallest_eigenvalue": {"before": float(eig_b[0]), "after": float(eig_a[0]),
                                    "full": float(eig_full[0])}}


# ----------------------------------------------------------------- writing


def _json_text(value: object, indent: int = 0) -> str:
    """JSON with sorted keys and every float as ``%.6f`` (stable across platforms)."""
    pad = "  " * (indent + 1)
    end = "  " * indent
    if isinstance(value, dict):
        if not value:
            return "{}"
        items = [f"{pad}{json.dumps(str(k))}: {_json_text(value[k], indent + 1)}"
                 for k in sorted(value)]
        return "{\n" + ",\n".join(items) + "\n" + end + "}"
    if isinstance(value, (list, tuple)):
        if not value:
            return "[]"
        if all(not isinstance(v, (dict, list, tuple)) for v in value):
            return "[" + ", ".join(_json_text(v, indent + 1) for v in value) + "]"
        return "[\n" + ",\n".join(pad + _json_text(v, indent + 1) for v in value) + "\n" + end + "]"
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        if not np.isfinite(value):
            raise DesignError(f"non-finite number in truth: {value!r}")
        text = FLOAT_TRUTH % float(value)
        return "0.000000" if text == "-0.000000" else text
    if value is None:
        return "null"
    return json.dumps(str(value), ensure_ascii=False)


def _csv_text(table: Table) -> str:
    labels = quarter_labels()
    lines = [",".join(("quarter",) + table.columns)]
    for label, row in zip(labels, table.values):
        cells = [FLOAT_TABLE % v for v in row]
        lines.append(",".join([label] + ["0.000" if c == "-0.000" else c for c in cells]))
    return "\n".join(lines) + "\n"


def generate(seed: int = SEED) -> tuple[dict[str, str], dict]:
    """Build every table and the truth record; return file texts by name and the truth.

    Each dataset draws from its own child of ``numpy.random.SeedSequence(seed)``,
    so changing one dataset's design leaves the others' numbers unchanged.
    """
    children = np.random.SeedSequence(seed).spawn(3)
    makers = (make_trio, make_accounts, make_shift)
    tables = [make(np.random.default_rng(child)) for make, child in zip(makers, children)]
    truth = {
        "seed": seed,
        "generator": "specs/generate_demo.py",
        "bit_generator": "PCG64 via numpy.random.default_rng(SeedSequence(seed).spawn(3)[i])",
        "scenario": "Vessmoor, an invented coastal region, and its harbour town Port Caddren. "
                    "Every name and number is invented.",
        "time": {"column": "quarter", "format": "quarter", "first": "1990Q1", "last": "2025Q4",
                 "rows": N_ROWS, "frequency": "quarterly"},
        "datasets": {t.name: dict(t.truth, file=f"{t.name}.csv") for t in tables},
    }
    files = {f"{t.name}.csv": _csv_text(t) for t in tables}
    files["truth.json"] = _json_text(truth) + "\n"
    return files, truth


def write_files(files: dict[str, str], out: Path) -> None:
    """Write ``files`` into ``out`` atomically per file (temporary names, then rename)."""
    out.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=".relspan-tmp-demo-", dir=out))
    try:
        for name, text in files.items():
            (staging / name).write_bytes(text.encode("utf-8"))
        for name in files:
            os.replace(staging / name, out / name)
    finally:
        shutil.rmtree(staging, ignore_errors=True)


def main(argv: list[str] | None = None) -> int:
    here = Path(__file__).resolve().parent
    parser = argparse.ArgumentParser(
        description="Write the invented Vessmoor demo data (CSV) and truth.json.")
    parser.add_argument("--out", type=Path, default=here / "data",
                        help="folder to write into (default: data/ beside this script)")
    parser.add_argument("--seed", type=int, default=SEED,
                        help=f"seed of numpy's SeedSequence (default {SEED}, the committed data)")
    args = parser.parse_args(argv)
    out: Path = args.out
    if out.exists() and not out.is_dir():
        print(f"generate_demo.py: --out {out} is a file, not a folder.\n"
              f"  Fix: give a folder (it is created if missing), e.g. --out specs/data.",
              file=sys.stderr)
        return 2
    try:
        files, _ = generate(args.seed)
    except DesignError as err:
        print(f"generate_demo.py: seed {args.seed} gives data that miss a design property: {err}. "
              f"Nothing was written.\n  Fix: use the default seed {SEED}, or try another --seed.",
              file=sys.stderr)
        return 2
    try:
        write_files(files, out)
    except OSError as err:
        print(f"generate_demo.py: cannot write into {out}: {err.strerror or err}.\n"
              f"  Fix: choose a folder you can write to with --out.", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
