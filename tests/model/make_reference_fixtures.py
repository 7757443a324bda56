#!/usr/bin/python3
"""Writes the statsmodels reference fixtures for tests/model/*_reference_test.cc.

Reference: python3-statsmodels (Debian 12, 0.13.5), ETSModel, run with FIXED parameters and
'known' initial states on datasets statsmodels ships. Conventions (measured, see
shared REFERENCES.md): smoothing_trend / smoothing_seasonal are the state-space beta / gamma;
initial_seasonal[k] is the seasonal used for y[k] (chronological); res.states[t] is the state
after y[t] with the NEWEST seasonal in its seasonal column; resid is relative for M error.

Multiplicative-season forms are checked through res.simulate(..., anchor='start',
random_errors=E) with a shared error matrix, because its smoother updates the season with the
method form gamma* y/l + (1 - gamma*) s, while simulate follows the published state space
equations (Hyndman, Koehler, Ord & Snyder 2008, ch. 2).

Usage: make_reference_fixtures.py OUTPUT_DIR   (writes *.csv there; deterministic output)
"""
import os
import sys

import numpy as np
import statsmodels
import statsmodels.api as sm
from statsmodels.datasets import elec_equip
from statsmodels.tsa.exponential_smoothing.ets import ETSModel

SOURCES = {
    "nile": "Cobb (1978), Biometrika 65(2), 243-51; annual Nile flow volume 1871-1970",
    "co2_monthly": "Keeling & Whorf (2004), SIO flask samples, Mauna Loa, CDIAC Trends; "
                   "monthly means of the weekly series, last 96 months",
    "elec_equip": "Eurostat, euro area turnover index, manufacture of electrical equipment, "
                  "working-day adjusted, not seasonally adjusted; first 96 months",
    "elnino": "NOAA NWS CPC, ERSST.V3B, Nino 1+2 index; first 120 months",
}


def load(name):
    if name == "nile":
        return sm.datasets.nile.load_pandas().data["volume"].values.astype(float)
    if name == "co2_monthly":
        co2 = sm.datasets.co2.load_pandas().data["co2"].resample("MS").mean().values
        return co2[-96:].astype(float)
    if name == "elec_equip":
        return elec_equip.load().data.iloc[:, 0].values[:96].astype(float)
    if name == "elnino":
        return sm.datasets.elnino.load_pandas().data.iloc[:, 1:].values.ravel()[:120].astype(float)
    raise ValueError(name)


def fmt(v):
    return repr(float(v))


def initial_state(y, trend, m):
    """A simple known initial state: mean of the first season, seasonal deviations from it."""
    if m > 1:
        first = y[:m]
        level = float(np.mean(first))
        season = [float(v - level) for v in first]
    else:
        level = float(y[0])
        season = []
    return level, (0.5 if trend else 0.0), season


def build(y, error, trend, damped, seasonal, m, level, slope, season):
    kw = dict(error=error, trend=trend, damped_trend=damped, seasonal=seasonal,
              initialization_method="known", initial_level=level)
    if trend:
        kw["initial_trend"] = slope
    if seasonal:
        kw["seasonal_periods"] = m
        kw["initial_seasonal"] = season
    return ETSModel(y, **kw)


def header(out, dataset, form, m, params, level, slope, season):
    out.write("# statsmodels=%s\n" % statsmodels.__version__)
    out.write("# dataset=%s\n" % dataset)
    out.write("# source=%s\n" % SOURCES[dataset])
    out.write("# form=%s\n# period=%d\n" % (form, m))
    for key in ("alpha", "beta", "gamma", "phi"):
        out.write("# %s=%s\n" % (key, fmt(params[key])))
    out.write("# initial_level=%s\n# initial_trend=%s\n" % (fmt(level), fmt(slope)))
    out.write("# initial_seasonal=%s\n" % ";".join(fmt(s) for s in season))


# (case, dataset, error, trend, damped, seasonal, m, alpha, beta, gamma, phi)
SMOOTH_CASES = [
    ("ANN", "nile", "add", None, False, None, 1, 0.25, 0.0, 0.0, 1.0),
    ("AAN", "nile", "add", "add", False, None, 1, 0.3, 0.05, 0.0, 1.0),
    ("AAdN", "nile", "add", "add", True, None, 1, 0.3, 0.05, 0.0, 0.9),
    ("ANA", "co2_monthly", "add", None, False, "add", 12, 0.4, 0.0, 0.2, 1.0),
    ("AAA", "co2_monthly", "add", "add", False, "add", 12, 0.4, 0.02, 0.2, 1.0),
    ("AAdA", "elec_equip", "add", "add", True, "add", 12, 0.5, 0.1, 0.2, 0.9),
    ("MNN", "elnino", "mul", None, False, None, 1, 0.6, 0.0, 0.0, 1.0),
    ("MAN", "nile", "mul", "add", False, None, 1, 0.3, 0.05, 0.0, 1.0),
    ("MAdN", "elnino", "mul", "add", True, None, 1, 0.6, 0.1, 0.0, 0.85),
    ("MAA", "elec_equip", "mul", "add", False, "add", 12, 0.5, 0.1, 0.2, 1.0),
    ("MAdA", "co2_monthly", "mul", "add", True, "add", 12, 0.4, 0.02, 0.2, 0.95),
]

# Multiplicative-season forms, compared through simulate with shared errors.
# (case, dataset, error, trend, damped, m, alpha, beta, gamma, phi, sigma)
SIM_CASES = [
    ("MAM", "elec_equip", "mul", "add", False, 12, 0.5, 0.1, 0.2, 1.0, 0.03),
    ("MAdM", "elec_equip", "mul", "add", True, 12, 0.5, 0.1, 0.2, 0.9, 0.03),
    ("MNM", "elec_equip", "mul", None, False, 12, 0.5, 0.0, 0.2, 1.0, 0.03),
    ("AAM", "elec_equip", "add", "add", False, 12, 0.5, 0.1, 0.2, 1.0, 2.0),
]
SIM_STEPS = 36
SIM_PATHS = 3


def form_name(error, trend, damped, seasonal):
    e = "A" if error == "add" else "M"
    t = "N" if trend is None else ("Ad" if damped else "A")
    s = "N" if seasonal is None else ("A" if seasonal == "add" else "M")
    return "ETS(%s,%s,%s)" % (e, t, s)


def write_smooth(outdir, case):
    name, dataset, error, trend, damped, seasonal, m, alpha, beta, gamma, phi = case
    y = load(dataset)
    level, slope, season = initial_state(y, trend, m if seasonal else 1)
    sm_params = [alpha]
    if trend:
        sm_params.append(beta)
    if seasonal:
        sm_params.append(gamma)
    if damped:
        sm_params.append(phi)
    res = build(y, error, trend, damped, seasonal, m, level, slope, season).smooth(sm_params)
    states = np.asarray(res.states)
    fitted = np.asarray(res.fittedvalues)
    resid = np.asarray(res.resid)
    with open(os.path.join(outdir, "smooth_%s.csv" % name), "w") as out:
        header(out, dataset, form_name(error, trend, damped, seasonal), m,
               dict(alpha=alpha, beta=beta, gamma=gamma, phi=phi), level, slope, season)
        out.write("# llf=%s\n" % fmt(res.llf))
        out.write("t,y,fitted,resid,level,trend,season\n")
        for t in range(len(y)):
            col = 1
            tr = 0.0
            if trend:
                tr = states[t, col]
                col += 1
            se = states[t, col] if seasonal else 0.0
            out.write(",".join([str(t), fmt(y[t]), fmt(fitted[t]), fmt(resid[t]), fmt(states[t, 0]),
                                fmt(tr), fmt(se)]) + "\n")


def write_sim(outdir, case, seed):
    name, dataset, error, trend, damped, m, alpha, beta, gamma, phi, sigma = case
    y = load(dataset)
    level, slope, add_season = initial_state(y, trend, m)
    season = [1.0 + s / level for s in add_season]
    sm_params = [alpha] + ([beta] if trend else []) + [gamma] + ([phi] if damped else [])
    res = build(y, error, trend, damped, "mul", m, level, slope, season).smooth(sm_params)
    errors = np.random.RandomState(seed).standard_normal((SIM_STEPS, SIM_PATHS)) * sigma
    paths = np.asarray(res.simulate(SIM_STEPS, anchor="start", repetitions=SIM_PATHS, random_errors=errors))
    with open(os.path.join(outdir, "simulate_%s.csv" % name), "w") as out:
        header(out, dataset, form_name(error, trend, damped, "mul"), m,
               dict(alpha=alpha, beta=beta, gamma=gamma, phi=phi), level, slope, season)
        out.write("path,t,error,y\n")
        for p in range(SIM_PATHS):
            for t in range(SIM_STEPS):
                out.write("%d,%d,%s,%s\n" % (p, t, fmt(errors[t, p]), fmt(paths[t, p])))


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: make_reference_fixtures.py OUTPUT_DIR")
    outdir = sys.argv[1]
    os.makedirs(outdir, exist_ok=True)
    for case in SMOOTH_CASES:
        write_smooth(outdir, case)
    for i, case in enumerate(SIM_CASES):
        write_sim(outdir, case, 1000 + i)


if __name__ == "__main__":
    main()
