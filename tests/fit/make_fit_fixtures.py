#!/usr/bin/python3
"""Reference numbers for the fit module from python3-statsmodels (Debian 12, ETSModel).

Usage (run with /usr/bin/python3, which sees Debian's statsmodels):
  make_fit_fixtures.py write [OUTDIR]   dataset files + statsmodels fits -> OUTDIR (default: fixtures/)
  make_fit_fixtures.py fit FILE M FORM  fit one form live; prints "llf aic aicc bic k alpha beta gamma phi"
  make_fit_fixtures.py smooth           JSON cases on stdin, one llf per line on stdout (see smooth())

Datasets (shipped with statsmodels; sources as its module docstrings give them):
  elec_equip  Eurostat, euro area turnover index, manufacture of electrical equipment
              (working-day adjusted, not seasonally adjusted), monthly 1995-01..2016-05, n = 257.
  co2         Keeling & Whorf (2004), SIO flask samples at Mauna Loa, CDIAC Trends compendium;
              weekly, resampled to monthly means ('MS'), n = 526; the 5 months with no sample are
              filled by linear interpolation so the reference can compute a likelihood.
  elnino      NOAA NWS Climate Prediction Center, ERSST.V3B, Nino 1+2 index, monthly 1950-2010, n = 732.
  nile        Cobb (1978), Biometrika 65(2), 243-251: annual Nile volume at Aswan 1871-1970, n = 100.
  sunspots    NOAA National Geophysical Data Center, yearly sunspot activity 1700-2008, n = 309
              (contains zeros).
"""
import json
import os
import sys
import time
import warnings

import numpy as np


def load(name):
    import statsmodels.api as sm
    if name == "elec_equip":
        from statsmodels.datasets import elec_equip
        return elec_equip.load().data.iloc[:, 0].values.astype(float), 12
    if name == "co2":
        s = sm.datasets.co2.load_pandas().data["co2"].resample("MS").mean()
        return s.interpolate(method="linear").values.astype(float), 12
    if name == "elnino":
        return sm.datasets.elnino.load_pandas().data.iloc[:, 1:].values.ravel().astype(float), 12
    if name == "nile":
        return sm.datasets.nile.load_pandas().data["volume"].values.astype(float), 1
    if name == "sunspots":
        return sm.datasets.sunspots.load_pandas().data["SUNACTIVITY"].values.astype(float), 1
    raise ValueError(name)


DATASETS = ["elec_equip", "co2", "elnino", "nile", "sunspots"]
# Forms whose equations agree between the reference and the published state space equations
# (no multiplicative season), in our notation.
FORMS_SEASONAL = ["ETS(A,N,N)", "ETS(A,A,N)", "ETS(A,Ad,N)", "ETS(A,N,A)", "ETS(A,A,A)", "ETS(A,Ad,A)",
                  "ETS(M,N,N)", "ETS(M,A,N)", "ETS(M,Ad,N)", "ETS(M,N,A)", "ETS(M,A,A)", "ETS(M,Ad,A)"]


def parse_form(form):
    e, t, s = form[4:-1].split(",")
    return dict(error="add" if e == "A" else "mul",
                trend=None if t == "N" else "add",
                damped_trend=(t == "Ad"),
                seasonal=None if s == "N" else ("add" if s == "A" else "mul"))


def model(y, form, m, **kw):
    from statsmodels.tsa.exponential_smoothing.ets import ETSModel
    f = parse_form(form)
    if f["seasonal"] is not None:
        kw["seasonal_periods"] = m
    return ETSModel(y, error=f["error"], trend=f["trend"], damped_trend=f["damped_trend"],
                    seasonal=f["seasonal"], **kw)


def our_k(form, m):
    """Our parameter count: smoothing + level (+trend) + (m-1) seasonal + sigma2."""
    f = parse_form(form)
    k = 1 + 1 + 1  # alpha, level, sigma2
    if f["trend"]:
        k += 2 + (1 if f["damped_trend"] else 0)
    if f["seasonal"]:
        k += 1 + (m - 1)
    return k


def fit(y, form, m):
    """Fits with the reference's defaults (bounds alpha, beta*, gamma* in [1e-4, 1-1e-4], phi in
    [0.8, 0.98]; 'estimated' initial states). Returns its llf, its criteria, its k, params, time."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0 = time.perf_counter()
        res = model(y, form, m).fit(disp=False)
        secs = time.perf_counter() - t0
    p = dict(zip(res.param_names, res.params))
    return dict(llf=float(res.llf), aic=float(res.aic), aicc=float(res.aicc), bic=float(res.bic),
                alpha=p.get("smoothing_level", float("nan")),
                beta=p.get("smoothing_trend", float("nan")), gamma=p.get("smoothing_seasonal", float("nan")),
                phi=p.get("damping_trend", float("nan")), seconds=secs, res=res)


def their_k(res, form, m):
    """The reference's count, recovered from its AIC: k = (aic + 2 llf) / 2."""
    return int(round((res.aic + 2 * res.llf) / 2))


def smooth(case):
    """case: {"values": [...] or "file": path, "period": m, "form": "ETS(A,Ad,A)",
    "alpha", "beta", "gamma", "phi" (state-space convention), "level", "trend",
    "seasonal": chronological list (first applies to y[0])}. Returns the reference's llf.
    Conventions: its smoothing_trend / smoothing_seasonal ARE the state-space beta / gamma,
    and with initialization_method='known' its initial_seasonal is chronological."""
    y = np.asarray(case["values"], dtype=float) if "values" in case else read_values(case["file"])
    f = parse_form(case["form"])
    kw = dict(initialization_method="known", initial_level=case["level"])
    params = [case["alpha"]]
    if f["trend"]:
        kw["initial_trend"] = case["trend"]
        params.append(case["beta"])
    if f["seasonal"]:
        kw["initial_seasonal"] = np.asarray(case["seasonal"], dtype=float)
        params.append(case["gamma"])
    if f["damped_trend"]:
        params.append(case["phi"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = model(y, case["form"], case["period"], **kw).smooth(params)
    return float(res.llf)


def read_values(path):
    out = []
    with open(path) as fh:
        for line in fh:
            line = line.strip()
            if not line or line.startswith("#") or line == "value":
                continue
            out.append(float(line))
    return np.asarray(out, dtype=float)


def versions():
    import numpy
    import scipy
    import statsmodels
    return f"statsmodels {statsmodels.__version__}, scipy {scipy.__version__}, numpy {numpy.__version__}, " \
           f"python {sys.version.split()[0]}"


def write(outdir):
    os.makedirs(outdir, exist_ok=True)
    rows = []
    for name in DATASETS:
        y, m = load(name)
        with open(os.path.join(outdir, name + ".txt"), "w") as fh:
            fh.write("value\n")
            for v in y:
                fh.write(repr(float(v)) + "\n")
        if name == "sunspots":
            continue  # only used for the refusal of multiplicative forms
        forms = FORMS_SEASONAL if m > 1 else [f for f in FORMS_SEASONAL if f.endswith(",N)")]
        for form in forms:
            r = fit(y, form, m)
            k = their_k(r["res"], form, m)
            rows.append([name, m, form, r["llf"], r["aic"], r["aicc"], r["bic"], k, our_k(form, m),
                         r["alpha"], r["beta"], r["gamma"], r["phi"]])
            print(name, form, r["llf"], file=sys.stderr)
    with open(os.path.join(outdir, "statsmodels_fits.csv"), "w") as fh:
        fh.write("# written by tests/fit/make_fit_fixtures.py with " + versions() + "\n")
        fh.write("# ETSModel(...).fit(disp=False), default bounds and 'estimated' initial states\n")
        fh.write("dataset,period,form,llf,aic,aicc,bic,k_reference,k_ours,alpha,beta,gamma,phi\n")
        for r in rows:
            fh.write(",".join(x if isinstance(x, str) else repr(x) for x in r) + "\n")


def main(argv):
    cmd = argv[1] if len(argv) > 1 else "write"
    if cmd == "write":
        write(argv[2] if len(argv) > 2 else os.path.join(os.path.dirname(os.path.abspath(__file__)), "fixtures"))
    elif cmd == "fit":
        y, m, form = read_values(argv[2]), int(argv[3]), argv[4]
        r = fit(y, form, m)
        print(r["llf"], r["aic"], r["aicc"], r["bic"], their_k(r["res"], form, m),
              r["alpha"], r["beta"], r["gamma"], r["phi"])
    elif cmd == "smooth":
        for case in json.load(sys.stdin):
            print(repr(smooth(case)))
    elif cmd == "versions":
        print(versions())
    else:
        print(__doc__, file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
