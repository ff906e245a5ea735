#!/usr/bin/env python3
"""The bench run's work done by a vectorised numpy program, to compare tailspan against.

Usage: python3 benches/numpy_reference.py FIT_JSON BOOK_CSV [--scenarios N] [--full 10000]

Per scenario, the same steps as `tailspan value configs/bench.toml` (Lee-Carter, trend +
idiosyncratic risk, whole life and deferred, guaranteed, escalating annuities, monthly in
advance at 3 %):
- draw both sexes' period indices over 80 years as a bivariate random walk with drift
  (innovations correlated as the fitted k_t's differences; drift redrawn from its
  estimator's normal law: parameter uncertainty);
- rates m = exp(a_x + b_x k_t) at the fitted ages, a Kannisto closure to 120 fitted by
  least squares on logit m of the top 10 ages, each year; q = 1 - exp(-m), 1 at 120;
- each cohort's (sex, age) diagonal q(x + k, 2025 + k), survival, truncated lifetimes
  e°x:n, e x:n and the annuity factor;
- the book's expected PV and expected cash flows from the cohort curves and each payment
  shape's per-year vectors;
- every life's death time by inversion of one uniform on its cohort's curve (UDD within
  the year), its payments before death from prefix sums, the simulated PV and cash flows.
Everything runs on arrays: a Python loop over scenarios and over the cohorts of one
scenario (about a hundred), never over lives. Nothing is written to disk (tailspan also
writes its Parquet files in the time it is measured on). The random numbers are numpy's,
so the figures are not tailspan's; the work is the same.

Prints the CPU seconds a scenario took (on one core: numpy's elementwise work here is
single-threaded) and the time for --full scenarios on two cores used perfectly, i.e.
halved, which benches/scaling sets beside tailspan's wall time.
"""

import csv
import json
import sys
import time

import numpy as np

YEAR, HORIZON, MAX_AGE, RATE, M = 2025, 80, 120, 0.03, 12
CLOSURE_AGES = 10


def args():
    a = sys.argv[1:]
    if len(a) < 2:
        print(__doc__)
        sys.exit(2)
    opt = lambda name, default: int(a[a.index(name) + 1]) if name in a else default
    return a[0], a[1], opt("--scenarios", 50), opt("--full", 10000)


def load_fits(path):
    fits = json.load(open(path))["fits"]
    by_sex = {f["sex"]: f for f in fits}
    out = []
    for sex in ("F", "M"):
        f = by_sex[sex]
        p, ts = f["parameters"], f["time_series"]["estimates"]
        out.append(dict(ages=f["ages"], years=f["years"], ax=np.array(p["ax"]),
                        bx=np.array(p["bx"]), kt=np.array(p["kt"]),
                        drift=ts["drift"][0], drift_var=ts["drift_covariance"][0][0]))
    return out


def load_book(path):
    rows = list(csv.DictReader(open(path)))
    sex = np.array([0 if r["sex"] == "F" else 1 for r in rows])
    age = np.array([int(r["age"]) for r in rows])
    total = np.array([float(r["amount"]) * float(r.get("weight") or 1) for r in rows])
    shape = [(int(r.get("deferral") or 0), int(r["term"]) if r.get("term") else None,
              int(r.get("guarantee") or 0), float(r.get("escalation") or 0)) for r in rows]
    # As tailspan: a weight w stands for round(w) lives (at least one) sharing the amount.
    lives = np.maximum(np.round([float(r.get("weight") or 1) for r in rows]), 1).astype(int)
    pick = np.repeat(np.arange(len(rows)), lives)
    return sex[pick], age[pick], (total / lives)[pick], [shape[i] for i in pick]


def schedules(shapes, years):
    """Per shape: per-year A_k, B_k, certain cash, contingent cash and prefix sums."""
    n = len(shapes)
    pv_level, pv_slope = np.zeros((n, years)), np.zeros((n, years))
    certain_cash, cash_level = np.zeros((n, years)), np.zeros((n, years))
    certain_pv = np.zeros(n)
    prefixes, cash_prefixes, starts = [], [], np.zeros((n, years + 1), dtype=np.int64)
    for s, (deferral, term, guarantee, esc) in enumerate(shapes):
        pay_years = min(term, years - deferral) if term is not None else years - deferral
        j = np.arange(pay_years * M)
        t = deferral + j / M
        k = np.floor(t).astype(np.int64)
        f = t - k
        cash = (1 + esc) ** np.floor(t) / M
        pv = cash * (1 + RATE) ** -t
        certain = j < min(guarantee * M, len(j))
        certain_pv[s] = pv[certain].sum()
        np.add.at(certain_cash[s], k[certain], cash[certain])
        c = ~certain
        np.add.at(pv_level[s], k[c], pv[c])
        np.add.at(pv_slope[s], k[c], (pv * f)[c])
        np.add.at(cash_level[s], k[c], cash[c])
        prefixes.append(np.concatenate([[0.0], np.cumsum(np.where(c, pv, 0.0))]))
        cash_prefixes.append(np.concatenate([[0.0], np.cumsum(np.where(c, cash, 0.0))]))
        starts[s] = np.searchsorted(t, np.arange(years + 1), side="left")
    width = max(len(p) for p in prefixes)
    pad = lambda ps: np.array([np.pad(p, (0, width - len(p)), mode="edge") for p in ps])
    return dict(pv_level=pv_level, pv_slope=pv_slope, certain_pv=certain_pv,
                certain_cash=certain_cash, cash_level=cash_level, pv_prefix=pad(prefixes),
                cash_prefix=pad(cash_prefixes), year_start=starts, width=width)


def main():
    fit_path, book_path, scenarios, full = args()
    fits = load_fits(fit_path)
    sex, age, amount, shape_list = load_book(book_path)
    first_age, top_fit = fits[0]["ages"]
    last_fit = fits[0]["years"][1]
    ages = np.arange(first_age, MAX_AGE + 1)
    fitted = np.arange(first_age, top_fit + 1)
    closure = np.arange(top_fit + 1, MAX_AGE + 1)
    steps = YEAR - last_fit - 1 + HORIZON  # projected years before and from the valuation year
    years = MAX_AGE - age.min() + 1

    # Cohorts (sex, age) and shapes; lives sorted by cohort, then shape.
    uniq = {}
    shape_of = np.array([uniq.setdefault(s, len(uniq)) for s in shape_list])
    ordered_shapes = sorted(uniq, key=uniq.get)
    sched = schedules(ordered_shapes, years)
    cohort_key = sex * 1000 + age
    cohorts, cohort_of = np.unique(cohort_key, return_inverse=True)
    order = np.lexsort((shape_of, cohort_of))
    cohort_of, shape_of, amount = cohort_of[order], shape_of[order], amount[order]
    bounds = np.searchsorted(cohort_of, np.arange(len(cohorts) + 1))
    c_sex, c_age = cohorts // 1000, cohorts % 1000
    block_key = cohort_of * len(ordered_shapes) + shape_of
    blocks, block_of = np.unique(block_key, return_inverse=True)
    block_amount = np.bincount(block_of, weights=amount)
    b_cohort, b_shape = blocks // len(ordered_shapes), blocks % len(ordered_shapes)
    shape_amount = np.bincount(shape_of, weights=amount, minlength=len(ordered_shapes))
    # Diagonal gather indices: cohort c in policy year k reads age c_age + k in year k.
    k_idx = np.arange(years)
    diag_age = c_age[:, None] + k_idx[None, :]
    valid = diag_age <= MAX_AGE
    diag_age = np.minimum(diag_age, MAX_AGE) - first_age
    diag_year = np.broadcast_to(YEAR - last_fit - 1 + k_idx, diag_age.shape)
    discount = (1 + RATE) ** -np.arange(years + 1)
    flat_prefix = sched["pv_prefix"].ravel()
    flat_cash_prefix = sched["cash_prefix"].ravel()
    starts = sched["year_start"]

    # The joint random walk: innovations' covariance from both sexes' fitted k_t.
    diffs = np.vstack([np.diff(f["kt"]) for f in fits])
    chol = np.linalg.cholesky(np.cov(diffs))
    drift = np.array([f["drift"] for f in fits])
    drift_sd = np.sqrt([f["drift_var"] for f in fits])
    ax = np.vstack([f["ax"] for f in fits])[:, :, None]
    bx = np.vstack([f["bx"] for f in fits])[:, :, None]
    k_last = np.array([f["kt"][-1] for f in fits])
    # Closure regression on the top ages: logit m = α + β x, per sex and year.
    xs = fitted[-CLOSURE_AGES:] - fitted[-CLOSURE_AGES:].mean()
    rng = np.random.default_rng(20261202)

    start = time.process_time()
    total = 0.0
    for _ in range(scenarios):
        d = drift + drift_sd * rng.standard_normal(2)
        z = chol @ rng.standard_normal((2, steps))
        k = k_last[:, None] + np.cumsum(d[:, None] + z, axis=1)          # 2 × steps
        m = np.exp(ax + bx * k[:, None, :])                               # 2 × fitted × steps
        top = m[:, -CLOSURE_AGES:, :]
        logit = np.log(top / (1 - top))
        beta = (xs[None, :, None] * (logit - logit.mean(axis=1, keepdims=True))).sum(axis=1) \
            / (xs ** 2).sum()
        alpha = logit.mean(axis=1) - beta * fitted[-CLOSURE_AGES:].mean()
        eta = alpha[:, None, :] + beta[:, None, :] * closure[None, :, None]
        m_closed = np.exp(eta) / (1 + np.exp(eta))
        q = -np.expm1(-np.concatenate([m, m_closed], axis=1))             # 2 × ages × steps
        q[:, -1, :] = 1.0
        # Cohort curves.
        qc = np.where(valid, q[c_sex[:, None], diag_age, diag_year], 0.0)
        qc[~valid] = 1.0
        surv = np.hstack([np.ones((len(cohorts), 1)), np.cumprod(1 - qc, axis=1)])
        e_complete = 0.5 * (surv[:, :-1] + surv[:, 1:]).sum(axis=1)
        e_curtate = surv[:, 1:].sum(axis=1)
        annuity = surv @ discount
        # Expected PV and cash flows per block.
        sb, qb = surv[b_cohort, :-1], qc[b_cohort]
        pv_expected = block_amount @ (sched["certain_pv"][b_shape] + (
            sb * (sched["pv_level"][b_shape] - sched["pv_slope"][b_shape] * qb)).sum(axis=1))
        cash_expected = block_amount @ (sched["certain_cash"][b_shape]
                                        + sb * sched["cash_level"][b_shape])
        # Simulated deaths: K = max{k : S_k >= U}, one search per cohort's lives.
        u = rng.random(len(amount))
        death = np.empty(len(amount), dtype=np.int64)
        for c in range(len(cohorts)):
            lo, hi = bounds[c], bounds[c + 1]
            death[lo:hi] = np.searchsorted(-surv[c], -u[lo:hi], side="right") - 1
        s_k, s_k1 = surv[cohort_of, death], surv[cohort_of, death + 1]
        f = (s_k - u) / (s_k - s_k1)
        in_year = starts[shape_of, death + 1] - starts[shape_of, death]
        paid = starts[shape_of, death] + np.minimum(np.ceil(f * M).astype(np.int64), in_year)
        flat = shape_of * sched["width"] + paid
        pv_simulated = amount @ flat_prefix[flat] + shape_amount @ sched["certain_pv"]
        year_flat = shape_of * sched["width"] + starts[shape_of, death]
        partial = np.bincount(death, weights=amount * (flat_cash_prefix[flat]
                                                       - flat_cash_prefix[year_flat]),
                              minlength=years)
        dying = np.bincount(shape_of * (years + 1) + death, weights=amount,
                            minlength=len(ordered_shapes) * (years + 1))
        dying = dying.reshape(len(ordered_shapes), years + 1)
        alive_after = dying.sum(axis=1, keepdims=True) - np.cumsum(dying, axis=1)[:, :years]
        cash_simulated = shape_amount @ sched["certain_cash"] + (
            alive_after * sched["cash_level"]).sum(axis=0) + partial
        total += pv_expected + pv_simulated + cash_expected.sum() + cash_simulated.sum() \
            + e_complete.sum() + e_curtate.sum() + annuity.sum()
    cpu = time.process_time() - start
    per = cpu / scenarios
    print(f"numpy: {scenarios} scenarios x {len(amount)} lives in {cpu:.2f} s CPU, "
          f"{1e3 * per:.2f} ms a scenario; {full} scenarios on 2 cores used perfectly: "
          f"{per * full / 2:.2f} s (checksum {total:.6e})")


if __name__ == "__main__":
    main()
