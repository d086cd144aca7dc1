#!/usr/bin/python3
# SPDX-License-Identifier: GPL-3.0-or-later
"""Live reference check of the growth fits against statsmodels.

Reference: statsmodels (Debian python3-statsmodels), run with Debian's
/usr/bin/python3:
  - Poisson and quasi-Poisson: statsmodels.api.GLM, family Poisson
    (quasi-Poisson: scale='X2'), treatment-coded weekday dummies (the slope
    does not depend on the coding), offsets passed as offset=.
  - NB2: statsmodels GLM family NegativeBinomial(alpha), whose llf is the
    full NB2 log-likelihood (as statsmodels.discrete NegativeBinomial
    'nb2'), maximised over alpha with scipy's bounded Brent search, gives
    the slope, theta = 1/alpha and the log-likelihood; the same GLM with
    alpha = 1/theta fixed at our estimate gives the standard error.
  - Profile-likelihood intervals: refits with the offset r*t (theta
    re-estimated for NB2) and scipy.optimize.brentq on the log-likelihood.
Tolerances: 1e-6 relative for Poisson, 1e-4 for NB2 (relative to
max(|value|, SE) for the slope and interval ends).
Windows: simulated series with weekday effects and offsets (fixed seed
numpy Generator), and windows of examples/demo.csv when that file has data.
Exit 1 on any mismatch, and when statsmodels cannot be imported.
"""
import os as _os
import sys as _sys
if _os.environ.get("TWOFOLD_SANITIZER_BUILD") or _os.environ.get("TWOFOLD_SKIP_BINDINGS"):
    print("*** SKIPPED under sanitizers: %s is slow or loads outside programs;"
          " the normal build runs it ***" % _os.path.basename(__file__))
    _sys.exit(77)

import os
import subprocess
import sys
import warnings

try:
    import numpy as np
    import scipy.optimize
    import scipy.stats
    import statsmodels.api as sm
except Exception as e:  # a missing reference is a failure, never a pass
    print("FAIL: statsmodels/scipy/numpy not importable (%s); this reference "
          "check cannot run" % e, file=sys.stderr)
    sys.exit(1)

warnings.simplefilter("ignore")
top_srcdir = os.environ.get("top_srcdir", ".")
top_builddir = os.environ.get("top_builddir", ".")
driver = os.path.join(top_builddir, "tests", "growth-driver")
LEVEL = 0.95
failures = []
maxrel = {}


def design(n, fwd, weekday, with_t=True):
    t = np.arange(n, dtype=float)
    cols = [np.ones(n)]
    if with_t:
        cols.append(t)
    if weekday:
        wd = (fwd - 1 + np.arange(n)) % 7
        for d in range(1, 7):
            cols.append((wd == d).astype(float))
    return np.column_stack(cols)


def keep(y):
    return ~np.isnan(y)


def pois_fit(y, X, off, scale=None):
    m = sm.GLM(y, X, family=sm.families.Poisson(), offset=off)
    return m.fit(tol=1e-12, maxiter=100, scale=scale)


def nb_glm(y, X, off, alpha):
    return sm.GLM(y, X, family=sm.families.NegativeBinomial(alpha=alpha),
                  offset=off).fit(tol=1e-11, maxiter=100)


def nb_fit(y, X, off):
    """NB2 maximum likelihood with statsmodels: the GLM NegativeBinomial
    log-likelihood (full, gammaln terms included) maximised over log alpha
    by scipy's bounded Brent search; returns (GLM result, alpha)."""
    f = lambda la: -nb_glm(y, X, off, np.exp(la)).llf
    o = scipy.optimize.minimize_scalar(f, bounds=(np.log(1e-9), np.log(50.0)),
                                       method="bounded",
                                       options={"xatol": 1e-9})
    alpha = float(np.exp(o.x))
    return nb_glm(y, X, off, alpha), alpha


def profile(llf_at, rhat, llhat, se, cut):
    target = llhat - cut
    out = []
    for s in (-1.0, 1.0):
        d = 2.0 * se
        while llf_at(rhat + s * d) > target:
            d *= 2.0
        f = lambda r: llf_at(r) - target
        a, b = (rhat + s * d, rhat) if s < 0 else (rhat, rhat + s * d)
        out.append(scipy.optimize.brentq(f, a, b, xtol=1e-13, rtol=1e-13))
    return out


def compare(label, what, ours, ref, tol, scale=None):
    denom = max(abs(ref), scale if scale is not None else 0.0, 1e-300)
    rel = abs(ours - ref) / denom
    key = label.split(":")[1] + " " + what
    maxrel[key] = max(maxrel.get(key, 0.0), rel)
    if not (rel <= tol):
        failures.append("%s %s: ours %.12g, statsmodels %.12g (rel %.3g > %g)"
                        % (label, what, ours, ref, rel, tol))


NB_PROFILES = 5  # NB2 profile refits are slow in Python: check this many
nb_profiles_done = 0


def reference(w):
    """statsmodels results for one window spec."""
    y, off, n, fwd, wk, model = (w["y"], w["off"], len(w["y"]), w["fwd"],
                                 w["weekday"], w["model"])
    k = keep(y)
    t = np.arange(n, dtype=float)[k]
    yy = y[k]
    oo = (off if off is not None else np.zeros(n))[k]
    X = design(n, fwd, wk)[k]
    X0 = design(n, fwd, wk, with_t=False)[k]
    out = {}
    if model in ("poisson", "quasipoisson"):
        f = pois_fit(yy, X, oo)
        r, se = f.params[1], f.bse[1]
        df = f.df_resid
        disp = f.pearson_chi2 / df
        out.update(r=r, loglik=f.llf, deviance=f.deviance, dispersion=disp)
        if model == "poisson":
            z = scipy.stats.norm.ppf(0.5 + LEVEL / 2)
            cut = scipy.stats.chi2.ppf(LEVEL, 1) / 2
            out["se"] = se
        else:
            fq = pois_fit(yy, X, oo, scale="X2")
            se = fq.bse[1]
            z = scipy.stats.t.ppf(0.5 + LEVEL / 2, df)
            cut = z * z * disp / 2
            out["se"] = se
        out["wald_lo"], out["wald_hi"] = r - z * se, r + z * se

        def llf_at(rr):
            return pois_fit(yy, X0, oo + rr * t).llf
        out["prof_lo"], out["prof_hi"] = profile(llf_at, r, f.llf, se, cut)
        return out
    f, alpha = nb_fit(yy, X, oo)
    r = f.params[1]
    out.update(r=r, theta=1.0 / alpha, loglik=f.llf, alpha=alpha)
    z = scipy.stats.norm.ppf(0.5 + LEVEL / 2)
    cut = scipy.stats.chi2.ppf(LEVEL, 1) / 2

    global nb_profiles_done
    # no profile for an underdispersed window (alpha -> 0): compared with
    # the Poisson GLM below instead
    if nb_profiles_done < NB_PROFILES and alpha > 1e-6:
        nb_profiles_done += 1

        def llf_at(rr):
            return nb_fit(yy, X0, oo + rr * t)[0].llf
        out["prof_lo"], out["prof_hi"] = profile(llf_at, r, f.llf, f.bse[1],
                                                 cut)
    out["_z"] = z
    out["_X"], out["_y"], out["_o"] = X, yy, oo
    return out


def nb_se_at(ref, theta):
    g = sm.GLM(ref["_y"], ref["_X"],
               family=sm.families.NegativeBinomial(alpha=1.0 / theta),
               offset=ref["_o"]).fit(tol=1e-12, maxiter=100)
    return g.params[1], g.bse[1], g.deviance, g.pearson_chi2 / g.df_resid


def run_driver(windows):
    lines = []
    for w in windows:
        y = w["y"]
        lines.append("%s %s %d %d %d %d" % (w["name"], w["model"],
                                            w["weekday"], w["fwd"], len(y),
                                            w["off"] is not None))
        lines.append(" ".join("nan" if np.isnan(v) else "%d" % v for v in y))
        if w["off"] is not None:
            lines.append(" ".join("%.17g" % v for v in w["off"]))
    p = subprocess.run([driver], input="\n".join(lines) + "\n",
                       capture_output=True, text=True)
    if p.returncode != 0:
        print("FAIL: %s exited %d: %s" % (driver, p.returncode, p.stderr),
              file=sys.stderr)
        sys.exit(1)
    rows = p.stdout.strip().split("\n")
    head = rows[0].split("\t")
    res = {}
    for row in rows[1:]:
        v = row.split("\t")
        d = dict(zip(head, v))
        for key in head[2:]:
            d[key] = float(d[key])
        res[d["name"]] = d
    return res


# ---------------------------------------------------------------------
# Windows
# ---------------------------------------------------------------------
rng = np.random.Generator(np.random.PCG64(20240611))
windows = []
for i in range(30):
    n = int(rng.integers(14, 43))
    fwd = int(rng.integers(1, 8))
    wk = int(i % 4 != 3)
    r = rng.uniform(-0.12, 0.15)
    lvl = np.exp(rng.uniform(np.log(4), np.log(3000)))
    eff = rng.normal(0, 0.3, 7)
    eff -= eff.mean()
    t = np.arange(n)
    wd = (fwd - 1 + t) % 7
    off = None
    if i % 3 == 1:
        off = np.log(rng.uniform(0.5, 2.0, n))
    eta = np.log(lvl) + r * (t - n / 2) + (eff[wd] if wk else 0) + \
        (off if off is not None else 0)
    mu = np.exp(eta)
    model = ("poisson", "quasipoisson", "negbin")[i % 3]
    if model == "poisson":
        y = rng.poisson(mu).astype(float)
    else:
        theta = rng.uniform(5, 50)
        y = rng.negative_binomial(theta, theta / (theta + mu)).astype(float)
    if i % 5 == 2:
        y[int(rng.integers(1, n - 1))] = np.nan
    if np.nansum(y) < 30:
        y = y + 30
    windows.append(dict(name="sim%02d:%s" % (i, model), model=model, y=y,
                        off=off, fwd=fwd, weekday=wk))
    if model == "poisson" and i < 9:
        # the same window as NB2 too
        windows.append(dict(name="sim%02dnb:negbin" % i, model="negbin",
                            y=y, off=off, fwd=fwd, weekday=wk))

demo = os.path.join(top_srcdir, "examples", "demo.csv")
if os.path.exists(demo) and os.path.getsize(demo) > 0:
    import pandas as pd
    d = pd.read_csv(demo)
    cols = list(d.columns)
    region = "region" if "region" in cols else None
    date = "date" if "date" in cols else cols[0]
    counts = [c for c in cols if c not in (region, date)]
    groups = d.groupby(region) if region else [("all", d)]
    k = 0
    for reg, g in groups:
        g = g.sort_values(date)
        dates = pd.to_datetime(g[date])
        full = pd.date_range(dates.min(), dates.max(), freq="D")
        s = pd.Series(g[counts[0]].values.astype(float), index=dates)
        s = s.reindex(full)
        vals = s.values
        for start in range(0, len(vals) - 28, max(1, (len(vals) - 28) // 3)):
            y = vals[start:start + 28]
            if np.nansum(y) < 30 or np.isnan(y).sum() > 3:
                continue
            fwd = int(full[start].isoweekday())
            for model in ("poisson", "negbin"):
                windows.append(dict(name="demo%03d:%s" % (k, model),
                                    model=model, y=y, off=None, fwd=fwd,
                                    weekday=1))
            k += 1
            if k >= 12:
                break
        if k >= 12:
            break
    print("demo windows from examples/demo.csv: %d" % k)
else:
    print("*** SKIPPED PART: examples/demo.csv is empty or absent; the demo "
          "windows were NOT compared with statsmodels ***")

ours = run_driver(windows)
for w in windows:
    name = w["name"]
    o = ours[name]
    if o["status"] != "TWOFOLD_OK":
        failures.append("%s: our fit failed with %s" % (name, o["status"]))
        continue
    ref = reference(w)
    se = o["se"]
    if w["model"] != "negbin":
        tol = 1e-6
        for key in ("r", "wald_lo", "wald_hi", "prof_lo", "prof_hi"):
            compare(name, key + " (statsmodels GLM Poisson)", o[key],
                    ref[key], tol, scale=ref["se"])
        compare(name, "se (statsmodels GLM Poisson bse)", o["se"], ref["se"],
                tol)
        compare(name, "loglik (statsmodels GLM llf)", o["loglik"],
                ref["loglik"], tol)
        compare(name, "deviance (statsmodels GLM deviance)", o["deviance"],
                ref["deviance"], tol, scale=1.0)
        compare(name, "dispersion (statsmodels pearson_chi2/df_resid)",
                o["dispersion"], ref["dispersion"], tol)
        continue
    tol = 1e-4
    capped = int(o["flags"]) & 2
    if capped:
        # underdispersed window: statsmodels' alpha goes to 0 (or below);
        # compare with the Poisson GLM instead
        p = pois_fit(ref["_y"], ref["_X"], ref["_o"])
        compare(name, "r (capped theta; statsmodels GLM Poisson)", o["r"],
                p.params[1], tol, scale=p.bse[1])
        compare(name, "se (capped theta; statsmodels GLM Poisson)", o["se"],
                p.bse[1], tol)
        continue
    compare(name, "r (statsmodels NegativeBinomial nb2)", o["r"], ref["r"],
            tol, scale=se)
    compare(name, "theta (statsmodels NegativeBinomial 1/alpha)", o["theta"],
            ref["theta"], tol)
    compare(name, "loglik (statsmodels NegativeBinomial llf)", o["loglik"],
            ref["loglik"], tol)
    r_g, se_g, dev_g, disp_g = nb_se_at(ref, o["theta"])
    compare(name, "se (statsmodels GLM NegativeBinomial, alpha=1/theta)",
            o["se"], se_g, tol)
    z = ref["_z"]
    compare(name, "wald_lo (statsmodels GLM NB)", o["wald_lo"],
            r_g - z * se_g, tol, scale=se_g)
    compare(name, "wald_hi (statsmodels GLM NB)", o["wald_hi"],
            r_g + z * se_g, tol, scale=se_g)
    compare(name, "deviance (statsmodels GLM NB)", o["deviance"], dev_g, tol,
            scale=1.0)
    compare(name, "dispersion (statsmodels GLM NB)", o["dispersion"], disp_g,
            tol)
    for key in ("prof_lo", "prof_hi"):
        if key not in ref:
            continue
        compare(name, key + " (statsmodels NB2 profile, theta re-estimated)",
                o[key], ref[key], tol, scale=se)

print("windows compared: %d (NB2 profile intervals on %d of them)"
      % (len(windows), nb_profiles_done))
for k in sorted(maxrel):
    print("  max rel diff %-70s %.3g" % (k, maxrel[k]))
if failures:
    print("FAIL: %d mismatches against statsmodels:" % len(failures),
          file=sys.stderr)
    for f in failures:
        print("  " + f, file=sys.stderr)
    sys.exit(1)
print("PASS: growth fits agree with statsmodels")
