"""Validate the calibrated estimator presets against processes of known exponent.

For fGn and fBm of known Hurst exponent H = 0.1 ... 0.9, drawn by two independent exact
generators -- ``tfhrv.synth.fgn`` (Davies & Harte 1987) and the ``fbm`` package from PyPI
(its own Davies-Harte code; Davies & Harte 1987, Wood & Chan 1994) -- and for Gaussian
1/f^beta noise with beta = 2H + 1 from the ``colorednoise`` package from PyPI (its own
Timmer & Koenig 1995 code), at N = 2^14 and 2^16 beats, every long-record preset (alpha1,
alpha2, alpha_long, beta_wavelet_long, beta_spectral_long) is run by
``tfhrv.estimators.presets.estimate`` and corrected by
``tfhrv.calibration.calibrate.calibrate`` under both calibration models ("powerlaw" and
"fgn-fbm", the latter with the class statistic of the same path), over R seeds.  The
table gives, per cell, the true value (alpha = H for fGn and H + 1 for fBm and 1/f^beta
noise; beta = 2H - 1 and 2H + 1; Eke et al. 2000, Kiyono 2015), the mean calibrated
estimate, its bias and RMSE, the bias of the uncalibrated estimate, and the coverage of
the calibrated 95 % interval; then a summary per preset and model against these targets:

- mean |bias| over the grid <= 0.03 in alpha units for DFA and wavelet presets (wavelet
  beta converted to alpha units by dividing by 2, since alpha = (beta + 1) / 2);
- mean |bias| <= 0.05 in beta for the spectral preset on the stationary class (fGn);
- interval coverage within 0.92-0.98, per cell (read with its Monte-Carlo error: the
  "sig. off" count) and pooled over the cells of a group.

A model is checked inside its own family (fGn and fBm for "fgn-fbm"; fGn and 1/f^beta
noise for "powerlaw") and outside it (the other process above alpha = 1).

Conventions (so that the numbers can be read without the code):

- Each replicate draws one fGn path; the fBm path is its running sum (this is exactly how
  both generators define fBm), so the fGn and fBm rows of a seed share their noise.  The
  1/f^beta path (process "PL") is drawn 4N long and cut to its second quarter, as the
  calibration does, so that it is not periodic.
- Every path is standardised and mapped to an NN-like series 800 ms + 50 ms x path, as in
  ``scripts/make_calibration.py``; the spectral preset reads the beat times from it.
- Seeds start at 2 000 000 000, far from the seeds used to build the calibration tables
  (below 10^8), so no replicate repeats a calibration draw.
- ``calibrate`` returns NaN for an interval end it cannot invert (raw value beyond the
  tabulated range).  Coverage reads one NaN end as unbounded on that side; a replicate
  with both ends NaN has no interval and counts as a miss.  The column "NaN" gives the
  share of replicates with at least one NaN end.
- Flags: "B" |bias| above the preset's target (per cell, in the preset's target units);
  "C" coverage outside 0.92-0.98; "C!" outside and significantly different from 0.95
  (two-sided exact binomial test, p < 0.01); "N" more than 5 % NaN ends.
- Coverage with R = 100 has a Monte-Carlo SE of about 0.022 at 0.95, so "C" without "!"
  is mostly noise; the summary counts both.

The ``fbm`` package draws from NumPy's global random state (its only interface), so the
worker seeds ``np.random.seed`` before each of its draws; nothing else uses global state.

Run:  python scripts/validate_estimators.py [--quick] [--reps R] [--workers 2]
          [--out docs/validation_estimators.md]
Takes about 40 minutes of one core per 100 replicates (most of it in the ``fbm`` package's
pure-Python Davies-Harte loop and at 2^16 beats); docs/validation_estimators.md used
R = 200; --quick (R = 20) takes a tenth of that.

References
----------
Davies RB, Harte DS. Tests for Hurst effect. Biometrika 1987;74:95-101.
doi:10.1093/biomet/74.1.95
Wood ATA, Chan G. Simulation of stationary Gaussian processes in [0,1]^d. J Comput Graph
Stat 1994;3:409-432. doi:10.1080/10618600.1994.10474655
Eke A, Herman P, Bassingthwaighte JB, et al. Physiological time series: distinguishing
fractal noises from motions. Pflugers Arch 2000;439:403-415. doi:10.1007/s004249900135
Kiyono K. Establishing a direct connection between detrended fluctuation analysis and
Fourier analysis. Phys Rev E 2015;91:052820. doi:10.1103/PhysRevE.91.052820
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np
from scipy import stats

from tfhrv.calibration.calibrate import MODELS, calibrate, class_statistic, load_table
from tfhrv.core.errors import InsufficientDataError
from tfhrv.estimators.presets import estimate
from tfhrv.synth import fgn

HURSTS = (0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9)
LENGTHS = (2**14, 2**16)
CHECKED = ("alpha1", "alpha2", "alpha_long", "beta_wavelet_long", "beta_spectral_long")
GENERATORS = ("tfhrv", "fbm", "colorednoise")
#: the processes each generator draws
GENERATOR_PROCESSES = {"tfhrv": ("fGn", "fBm"), "fbm": ("fGn", "fBm"), "colorednoise": ("PL",)}
#: processes inside each calibration model's family
IN_FAMILY = {"powerlaw": ("fGn", "PL"), "fgn-fbm": ("fGn", "fBm")}
SEED_BASE = 2_000_000_000
#: Target on the mean |bias| over the grid, and the units it is stated in.
BIAS_TARGET = {"alpha1": 0.03, "alpha2": 0.03, "alpha_long": 0.03,
               "beta_wavelet_long": 0.03, "beta_spectral_long": 0.05}
COVERAGE_TARGET = (0.92, 0.98)
#: Result columns per replicate.
RAW, EST, LO, HI, NOBS = range(5)
#: Hint "flat" when the table's mean curve rises by less than this per unit of truth
#: around the true value (1 = unbiased; the inversion amplifies noise by 1 / slope).
FLAT_SLOPE = 0.5


def target_units(preset: str) -> str:
    """'alpha' for DFA and wavelet presets (wavelet beta / 2), 'beta' for spectral."""
    return "beta" if preset == "beta_spectral_long" else "alpha"


def to_target_units(preset: str, value):
    """A difference in the preset's convention, in its target units."""
    return value / 2.0 if preset == "beta_wavelet_long" else value


def truth(preset: str, process: str, hurst: float) -> float:
    """True exponent of fGn/fBm (and 1/f^beta noise, beta = 2H + 1) with this H in the
    preset's convention."""
    alpha = hurst if process == "fGn" else hurst + 1.0
    return alpha if preset.startswith("alpha") else 2.0 * alpha - 1.0


def _valid(preset: str, n: int) -> bool:
    """A preset is validated at a length inside its calibration table's range."""
    table = load_table(preset)
    lengths = table.lengths[np.isfinite(table.mean).any(axis=(0, 1))]
    return bool(lengths.min() <= n <= lengths.max())


def _draw_fgn(generator: str, n: int, hurst: float, seed: int, cache: dict) -> np.ndarray:
    if generator == "colorednoise":
        import colorednoise  # PyPI "colorednoise"; its own Timmer-Koenig generator

        beta = 2.0 * hurst + 1.0
        return colorednoise.powerlaw_psd_gaussian(beta, 4 * n, random_state=seed % 2**32)[
            n: 2 * n]
    if generator == "tfhrv":
        return fgn(n, hurst, rng=seed)
    import fbm as fbm_pkg  # PyPI "fbm"; imported here so --generators tfhrv needs nothing

    key = (n, hurst)
    if key not in cache:  # reuse the instance: it caches the circulant eigenvalues
        cache.clear()
        cache[key] = fbm_pkg.FBM(n=int(n), hurst=float(hurst), method="daviesharte")
    np.random.seed(seed % 2**32)  # noqa: NPY002 - the package reads only global state
    with warnings.catch_warnings():
        # the package falls back to an O(n^2) method with a warning if the embedding is
        # not non-negative definite; that must not happen silently here
        warnings.simplefilter("error")
        return cache[key].fgn()


def _nn_like(path: np.ndarray) -> np.ndarray:
    return 800.0 + 50.0 * (path - path.mean()) / path.std()


def cell(job: tuple) -> tuple:
    """All replicates of one (generator, H, N): array (process, preset, model, rep, 5)."""
    generator, hurst, n, reps, seed0, presets = job
    processes = GENERATOR_PROCESSES[generator]
    out = np.full((len(processes), len(presets), len(MODELS), reps, 5), np.nan)
    failures = 0
    cache: dict = {}
    for r in range(reps):
        x = _draw_fgn(generator, n, hurst, seed0 + r, cache)
        paths = (x,) if processes == ("PL",) else (x, np.cumsum(x))
        for p_i, path in enumerate(paths):
            nn = _nn_like(path)
            stat = class_statistic(nn)
            for k, preset in enumerate(presets):
                try:
                    raw = estimate(preset, nn)
                except InsufficientDataError:
                    failures += 1
                    continue
                for m_i, model in enumerate(MODELS):
                    cal = calibrate(raw, estimator=preset, n=nn.size, model=model,
                                    class_stat=stat)
                    out[p_i, k, m_i, r] = (cal.slope_exponent, cal.exponent, cal.ci[0],
                                           cal.ci[1], cal.n_obs)
    return job[:3], out, failures


def summarise_cell(res: np.ndarray, true: float) -> dict:
    """Statistics of one cell's replicates (rows of RAW, EST, LO, HI)."""
    ok = np.isfinite(res[:, EST])
    est, raw = res[ok, EST], res[ok, RAW]
    lo, hi = res[ok, LO], res[ok, HI]
    both_nan = np.isnan(lo) & np.isnan(hi)
    cover = (np.where(np.isnan(lo), -np.inf, lo) <= true) & \
            (true <= np.where(np.isnan(hi), np.inf, hi)) & ~both_nan
    m = int(ok.sum())
    k = int(cover.sum())
    pval = stats.binomtest(k, m, 0.95).pvalue if m else float("nan")
    return {
        "n": m,
        "covered": k,
        "mean": float(est.mean()) if m else float("nan"),
        "bias": float(est.mean() - true) if m else float("nan"),
        "raw_bias": float(raw.mean() - true) if m else float("nan"),
        "sd": float(est.std(ddof=1)) if m > 1 else float("nan"),
        "rmse": float(np.sqrt(np.mean((est - true) ** 2))) if m else float("nan"),
        "coverage": k / m if m else float("nan"),
        "coverage_p": pval,
        "nan_share": float(np.mean(np.isnan(lo) | np.isnan(hi))) if m else float("nan"),
        "no_interval": float(np.mean(both_nan)) if m else float("nan"),
        "n_obs": int(np.median(res[ok, NOBS])) if m else 0,
    }


def hints(preset: str, model: str, true: float, s: dict) -> str:
    """Diagnoses read off the calibration table (not interpretations).

    "edge": the truth is the first or last point of the table's grid, so the corrected
    value cannot pass it; "flat k": the table's mean curve at this length rises only k per
    unit of truth near the truth (not invertible for k << 1); "no CI x": share of
    replicates where calibrate returned no interval (both ends NaN).
    """
    table = load_table(preset, model=model)
    out = []
    if np.isclose(true, table.truth[0]) or np.isclose(true, table.truth[-1]):
        out.append("edge")
    if s["n_obs"]:
        mean = table.curves(s["n_obs"]).mean
        i = int(np.argmin(np.abs(table.truth - true)))
        a, b = max(i - 1, 0), min(i + 1, table.truth.size - 1)
        slope = (mean[b] - mean[a]) / (table.truth[b] - table.truth[a])
        if not np.isfinite(slope):
            out.append("table NaN")
        elif slope < FLAT_SLOPE:
            out.append(f"flat {slope:.2f}")
    if s["no_interval"] > 0.05:
        out.append(f"no CI {s['no_interval']:.2f}")
    return ", ".join(out)


def flags(preset: str, s: dict) -> str:
    out = []
    if abs(to_target_units(preset, s["bias"])) > BIAS_TARGET[preset]:
        out.append("B")
    lo, hi = COVERAGE_TARGET
    if not lo <= s["coverage"] <= hi:
        out.append("C!" if s["coverage_p"] < 0.01 else "C")
    if s["nan_share"] > 0.05:
        out.append("N")
    return " ".join(out)


def fmt(v: float, d: int = 3, sign: bool = False) -> str:
    if not np.isfinite(v):
        return "—"
    return f"{v:+.{d}f}" if sign else f"{v:.{d}f}"


def _group_rows(rows: list[dict], preset: str, model: str, process: str, n: int) -> list:
    return [r for r in rows if r["preset"] == preset and r["model"] == model
            and (process == "all" or r["process"] == process) and (n == 0 or r["n"] == n)]


def build_report(rows: list[dict], presets: tuple, generators: tuple, reps: int) -> str:
    lines = ["## Summary per preset and model", "",
             "Bias in target units (alpha; wavelet beta / 2; beta for the spectral "
             "preset), averaged over the generators and H = 0.1 ... 0.9.  Coverage target "
             f"{COVERAGE_TARGET[0]:.2f}-{COVERAGE_TARGET[1]:.2f}; 'pooled' is over every "
             "replicate of the group (95 % Clopper-Pearson interval in brackets).  "
             "'family' says whether the process is the one the model was calibrated on.", "",
             "| preset | model | process, N | family | mean abs bias | max abs bias "
             "| bias met | coverage pooled | cells min-max | cells in 0.92-0.98 "
             "| cells sig. off (p<0.01) | coverage met |",
             "|---|---|---|---|---|---|---|---|---|---|---|---|"]
    processes = [p for p in ("fGn", "fBm", "PL")
                 if any(r["process"] == p for r in rows)]
    groups = [(c, n) for c in processes for n in LENGTHS] + [(c, 0) for c in processes]
    for preset in presets:
        for model in MODELS:
            for proc, n in groups:
                sel = _group_rows(rows, preset, model, proc, n)
                if not sel:
                    continue
                where = f"{proc}, " + (f"2^{int(np.log2(n))}" if n else "both N")
                fam = "in" if proc in IN_FAMILY[model] else "outside"
                b = np.array([abs(to_target_units(preset, r["stats"]["bias"])) for r in sel])
                cov = np.array([r["stats"]["coverage"] for r in sel])
                k = sum(r["stats"]["covered"] for r in sel)
                m = sum(r["stats"]["n"] for r in sel)
                ci = stats.binomtest(k, m).proportion_ci() if m else None
                pooled = (f"{k / m:.3f} [{ci.low:.3f}, {ci.high:.3f}]" if m else "—")
                sig = sum(1 for r in sel if r["stats"]["coverage_p"] < 0.01)
                inside = int(np.sum((cov >= COVERAGE_TARGET[0]) & (cov <= COVERAGE_TARGET[1])))
                spectral_motion = preset == "beta_spectral_long" and proc != "fGn"
                met = "—" if spectral_motion else (
                    "yes" if np.nanmean(b) <= BIAS_TARGET[preset] else "**no**")
                pooled_ok = m and COVERAGE_TARGET[0] <= k / m <= COVERAGE_TARGET[1]
                cov_met = ("yes" if sig == 0 and inside == cov.size else
                           "pooled; cells within noise" if sig == 0 and pooled_ok else
                           "**no**")
                lines.append(
                    f"| {preset} | {model} | {where} | {fam} | {np.nanmean(b):.3f} "
                    f"| {np.nanmax(b):.3f} | {met} | {pooled} "
                    f"| {np.nanmin(cov):.2f}-{np.nanmax(cov):.2f} | {inside}/{cov.size} "
                    f"| {sig} | {cov_met} |")
    lines += ["", "## Per cell", "",
              "| preset | model | generator | process | H | N | true | mean cal. | bias "
              "| raw bias | RMSE | coverage | NaN | flags | table hints |",
              "|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for r in rows:
        s = r["stats"]
        lines.append(
            f"| {r['preset']} | {r['model']} | {r['generator']} | {r['process']} "
            f"| {r['hurst']:.1f} | 2^{int(np.log2(r['n']))} | {r['true']:+.2f} "
            f"| {fmt(s['mean'])} | {fmt(s['bias'], sign=True)} "
            f"| {fmt(s['raw_bias'], sign=True)} | {fmt(s['rmse'])} "
            f"| {fmt(s['coverage'], 2)} | {fmt(s['nan_share'], 2)} "
            f"| {flags(r['preset'], s)} "
            f"| {hints(r['preset'], r['model'], r['true'], s)} |")
    dh = [g for g in generators if g in ("tfhrv", "fbm")]
    if len(dh) == 2:
        lines += ["", "## Generator agreement", "",
                  "Difference of the mean calibrated estimate (model powerlaw), tfhrv minus "
                  "fbm package, per (preset, process, H, N), in units of its standard error "
                  "sqrt(sd1^2/R1 + sd2^2/R2).  Under agreement |z| is about N(0,1) "
                  "distributed (0.5 % of cells above 2.8).", "",
                  "| preset | cells | mean z | max abs z | cells with abs z > 2.8 |",
                  "|---|---|---|---|---|"]
        for preset in presets:
            zs = []
            for r in rows:
                if (r["preset"] != preset or r["generator"] != dh[0]
                        or r["model"] != "powerlaw"):
                    continue
                o = next(q for q in rows if q["preset"] == preset and q["generator"] ==
                         dh[1] and q["process"] == r["process"] and q["model"] == r["model"]
                         and q["hurst"] == r["hurst"] and q["n"] == r["n"])
                a, b = r["stats"], o["stats"]
                se = np.sqrt(a["sd"] ** 2 / a["n"] + b["sd"] ** 2 / b["n"])
                if se > 0:
                    zs.append((a["mean"] - b["mean"]) / se)
            z = np.array(zs)
            lines.append(f"| {preset} | {z.size} | {np.mean(z):+.2f} | "
                         f"{np.max(np.abs(z)):.2f} | {int(np.sum(np.abs(z) > 2.8))} |")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--reps", type=int, default=100, help="replicates per cell (100)")
    ap.add_argument("--quick", action="store_true", help="20 replicates per cell")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--generators", nargs="+", choices=GENERATORS, default=list(GENERATORS))
    ap.add_argument("--out", help="also write the report (markdown) to this file")
    args = ap.parse_args(argv)
    reps = 20 if args.quick else args.reps
    generators = tuple(args.generators)
    t0 = time.perf_counter()

    jobs = []
    for gen in generators:
        for h_i, h in enumerate(HURSTS):
            for n_i, n in enumerate(LENGTHS):
                presets = tuple(p for p in CHECKED if _valid(p, n))
                seed0 = SEED_BASE + 10_000_000 * GENERATORS.index(gen) + 100_000 * h_i \
                    + 10_000 * n_i
                jobs.append((gen, h, n, reps, seed0, presets))
    # the costliest first (long series, pure-Python generator) for load balance
    jobs.sort(key=lambda j: (j[2], j[0] == "fbm"), reverse=True)

    rows = []
    failures = 0
    with ProcessPoolExecutor(args.workers) as pool:
        for (gen, h, n), out, fail in pool.map(cell, jobs, chunksize=1):
            failures += fail
            presets = next(j[5] for j in jobs if j[:3] == (gen, h, n))
            for p_i, proc in enumerate(GENERATOR_PROCESSES[gen]):
                for k, preset in enumerate(presets):
                    true = truth(preset, proc, h)
                    for m_i, model in enumerate(MODELS):
                        rows.append({"preset": preset, "model": model, "generator": gen,
                                     "process": proc, "hurst": h, "n": n, "true": true,
                                     "stats": summarise_cell(out[p_i, k, m_i], true)})
            print(f"  {gen:12s} H={h:.1f} N={n:6d} done at {time.perf_counter() - t0:6.0f} s",
                  file=sys.stderr, flush=True)
    order = {p: i for i, p in enumerate(CHECKED)}
    rows.sort(key=lambda r: (order[r["preset"]], MODELS.index(r["model"]), r["process"],
                             r["generator"], r["n"], r["hurst"]))
    elapsed = time.perf_counter() - t0
    n_rep_table = {p: load_table(p).n_rep for p in CHECKED}
    cmd = "python scripts/validate_estimators.py " + " ".join(
        sys.argv[1:] if argv is None else argv)
    head = [
        "# Validation of the calibrated estimator presets", "",
        f"Made by `{cmd.strip()}` (R = {reps} replicates per cell, "
        f"generators: {', '.join(generators)}; total runtime {elapsed:.0f} s with "
        f"{args.workers} workers; numpy {np.__version__}).", "",
        "Calibration table replicates per cell (half at 65536 beats): "
        + ", ".join(f"{p} {v}" for p, v in n_rep_table.items())
        + ".  Estimation failures (InsufficientDataError): " + str(failures) + ".", "",
        "Method, conventions and flags: see the docstring of "
        "`scripts/validate_estimators.py`.  true = alpha (H for fGn, H + 1 for fBm and "
        "1/f^beta noise 'PL') for DFA presets, beta (2H - 1, 2H + 1) for the others.", "",
        "Reading notes (design facts, not results): model 'powerlaw' is calibrated on fGn "
        "below alpha 1 and Timmer-Koenig 1/f^beta noise above; model 'fgn-fbm' on fGn "
        "below and fBm above, with one belt per class of the class statistic (DFA-1 at "
        "the longest scales; scripts/make_calibration.py).  fBm and 1/f^beta noise share "
        "the low-frequency power law but differ at the shortest scales, so the "
        "'outside' rows show what a wrong model costs.  With R replicates, a coverage of "
        "0.95 has a Monte-Carlo SE of sqrt(0.95 x 0.05 / R) = "
        f"{np.sqrt(0.95 * 0.05 / reps):.3f}, and about 10 % of cells with a true "
        "coverage of exactly 0.95 fall outside 0.92-0.98 at R = 100; read the 'sig. off' "
        "and pooled columns.", ""]
    report = "\n".join(head) + "\n" + build_report(rows, CHECKED, generators, reps) + "\n"
    print(report)
    print(f"total runtime {elapsed:.1f} s", file=sys.stderr)
    if args.out:
        Path(args.out).parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(args.out).with_suffix(".tmp")
        tmp.write_text(report, encoding="utf-8")
        tmp.replace(args.out)


if __name__ == "__main__":
    main()
