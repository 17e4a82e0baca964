"""Python side of the dyad speed benchmark (driven by run.sh).

Subcommands:
  check   evaluate the seeded points dyad wrote (OUT/obsN/check.json) with the
          NumPy model and stop with an error unless every value agrees with
          dyad's to CHECK_RTOL relative (and -inf where dyad has -inf); also
          check that emcee's autocorrelation estimate equals dyad's on a chain
          dyad wrote (after `bench` has run: `check-tau`).
  time    time the NumPy log-posterior and full emcee runs on the same data,
          starting ensembles, walkers and burn-in as dyad; OUT/peer_results.json.
  report  print the side-by-side table (and write OUT/table.md).
"""

import argparse
import datetime
import json
import logging
import math
import os
import platform
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

import emcee
from peer_model import JointModel

# emcee logs a warning (with every tau) when a chain is shorter than 50 tau;
# the report states that per run instead ('>50 tau').
logging.getLogger("emcee").setLevel(logging.ERROR)

CHECK_RTOL = 1e-8
TAU_RTOL = 1e-6
OBSERVATION_COUNTS = (20, 100, 1000)
# Target of the benchmark: dyad at least this many times the peer's ESS/s.
TARGET_RATIO = 50.0


def load_model(out, n):
    d = Path(out) / f"obs{n}"
    return JointModel(d / "positions.csv", d / "velocities.csv"), json.loads((d / "check.json").read_text())


def cmd_check(args):
    worst = 0.0
    for n in OBSERVATION_COUNTS:
        model, doc = load_model(args.out, n)
        if model.names != doc["names"]:
            sys.exit(f"obs{n}: parameter order differs:\n  numpy {model.names}\n  dyad  {doc['names']}")
        if model.observation_count != n:
            sys.exit(f"obs{n}: numpy counts {model.observation_count} observations")
        if model.t_ref != doc["reference_epoch_jd"]:
            sys.exit(f"obs{n}: reference epoch {model.t_ref!r} vs dyad {doc['reference_epoch_jd']!r}")
        pts = doc["check_points"]
        X = np.array([p["x"] for p in pts])
        lp = model.log_prior(X)
        post = model.log_posterior(X)
        n_finite = 0
        for k, p in enumerate(pts):
            ref = p["log_posterior"]
            if ref is None:  # dyad's -inf is written as null
                if post[k] != -np.inf:
                    sys.exit(f"obs{n} point {k}: dyad -inf, numpy {post[k]!r}")
                continue
            n_finite += 1
            ll = model.log_likelihood(X[k : k + 1])[0]
            for what, mine, theirs in (
                ("log_prior", lp[k], p["log_prior"]),
                ("log_likelihood", ll, p["log_likelihood"]),
                ("log_posterior", post[k], ref),
            ):
                rel = abs(mine - theirs) / max(abs(theirs), 1.0)
                worst = max(worst, rel)
                if not rel <= CHECK_RTOL:
                    sys.exit(
                        f"obs{n} point {k}: {what} numpy {mine!r} vs dyad {theirs!r} "
                        f"(relative difference {rel:.3e} > {CHECK_RTOL:g})"
                    )
        print(
            f"check obs{n}: {n_finite} points agree with dyad's log-prior, log-likelihood and "
            f"log-posterior, {len(pts) - n_finite} outside the support are -inf on both sides"
        )
    print(f"check: largest relative difference {worst:.2e} (tolerance {CHECK_RTOL:g})")
    Path(args.out, "check_ok.json").write_text(json.dumps({"max_relative_difference": worst}))


def cmd_check_tau(args):
    """emcee's integrated_time on dyad's own chain must equal dyad's tau."""
    res = json.loads(Path(args.out, "dyad_results.json").read_text())
    for ds in res["data_sets"]:
        if not ds.get("chain_file"):
            continue
        steps, walkers, dim = ds["chain_shape"]
        chain = np.fromfile(Path(args.out, f"obs{ds['observations']}", ds["chain_file"]), dtype="<f8")
        chain = chain.reshape(steps, walkers, dim)
        tau_emcee = emcee.autocorr.integrated_time(chain, c=5, tol=50, quiet=True)
        tau_dyad = np.array(ds["serial"]["tau"])
        rel = np.max(np.abs(tau_emcee - tau_dyad) / tau_dyad)
        print(
            f"check-tau obs{ds['observations']}: emcee's estimate on dyad's chain "
            f"({steps} steps x {walkers} walkers) agrees with dyad's to {rel:.1e} relative "
            f"(tau_max {tau_dyad.max():.1f} vs {tau_emcee.max():.1f})"
        )
        if not rel <= TAU_RTOL:
            sys.exit(f"autocorrelation estimates differ: dyad {tau_dyad}, emcee {tau_emcee}")
        Path(args.out, "check_tau_ok.json").write_text(json.dumps({"max_relative_difference": float(rel)}))


def time_single(model, points, seconds, repeats):
    """Fastest of `repeats` blocks, on-CPU microseconds per call with one point."""
    rows = [p[None, :] for p in points]
    return _time_blocks(lambda: [model.log_posterior(r) for r in rows], len(rows), seconds, repeats)


def time_batch(model, batch, seconds, repeats):
    """Fastest of `repeats` blocks, on-CPU microseconds per point when `batch` is evaluated at once."""
    return _time_blocks(lambda: model.log_posterior(batch), len(batch), seconds, repeats)


def _time_blocks(work, points_per_call, seconds, repeats):
    t0 = time.process_time()
    w0 = time.perf_counter()
    calls = 0
    while time.perf_counter() - w0 < 0.05:
        work()
        calls += 1
    per_call = max(time.process_time() - t0, 1e-9) / calls
    rounds = max(1, int(seconds / per_call))
    best = math.inf
    for _ in range(repeats):
        t = time.process_time()
        for _ in range(rounds):
            work()
        best = min(best, (time.process_time() - t) * 1e6 / (rounds * points_per_call))
    return best


def load_average():
    try:
        return float(Path("/proc/loadavg").read_text().split()[0])
    except (OSError, ValueError, IndexError):
        return None


def fit_moves(weights):
    """The mixture `dyad fit` uses, in emcee's terms, with the weights dyad
    wrote: stretch (a = 2) and differential evolution (emcee's defaults
    gamma0 = 2.38 / sqrt(2 d), sigma = 1e-5, as dyad's). emcee draws one
    move per step for the whole ensemble, dyad one per walker and step."""
    return [(emcee.moves.StretchMove(a=2.0), weights["stretch"]),
            (emcee.moves.DEMove(), weights["differential_evolution"])]


def mixture_text(weights):
    return (f"stretch with probability {weights['stretch']:g}, differential evolution with "
            f"{weights['differential_evolution']:g}")


def run_emcee(model, start, walkers, steps, burn_in, moves, seed):
    sampler = emcee.EnsembleSampler(walkers, model.dim, model.log_posterior, vectorize=True, moves=moves)
    sampler.random_state = np.random.RandomState(seed).get_state()
    t, w = time.process_time(), time.perf_counter()
    sampler.run_mcmc(start, steps, progress=False)
    cpu_seconds, wall_seconds = time.process_time() - t, time.perf_counter() - w
    tau = sampler.get_autocorr_time(discard=burn_in, c=5, tol=50, quiet=True)
    kept = steps - burn_in
    tau_max = float(np.max(tau))
    return {
        "walkers": walkers,
        "steps": steps,
        "kept_steps": kept,
        "cpu_seconds": cpu_seconds,
        "wall_seconds": wall_seconds,
        "us_per_step_cpu": cpu_seconds * 1e6 / steps,
        "us_per_step_wall": wall_seconds * 1e6 / steps,
        "tau": [float(v) for v in tau],
        "tau_max": tau_max,
        "tau_long_enough": bool(kept > 50 * tau_max),
        "ess": walkers * kept / tau_max,
        "ess_per_second_cpu": walkers * steps / (tau_max * cpu_seconds),
        "ess_per_second_wall": walkers * steps / (tau_max * wall_seconds),
        "mean_acceptance": float(np.mean(sampler.acceptance_fraction)),
    }


def cmd_time(args):
    dyad = json.loads(Path(args.out, "dyad_results.json").read_text())
    burn_in, walkers = dyad["burn_in"], dyad["walkers"]
    steps_for = dict(zip(OBSERVATION_COUNTS, args.steps))
    results = []
    load_before = load_average()
    for n in OBSERVATION_COUNTS:
        model, doc = load_model(args.out, n)
        points = [np.array(p["x"]) for p in doc["check_points"] if p["log_posterior"] is not None]
        us = time_single(model, points, args.eval_seconds, args.eval_repeats)
        start = np.array(doc["start"][:walkers])
        half = walkers // 2
        us_batch = time_batch(model, start[:half], args.eval_seconds, args.eval_repeats)
        print(f"peer {n:>5} observations: {us:.1f} us per single evaluation, "
              f"{us_batch:.2f} us per point in batches of {half}")

        steps = steps_for[n]
        if steps <= burn_in:
            sys.exit(f"obs{n}: {steps} steps is not longer than the burn-in {burn_in}")
        runs = {}
        settings = (("stretch", emcee.moves.StretchMove(a=2.0)),
                    ("fit_moves", fit_moves(dyad["fit_moves_weights"])))
        for label, moves in settings:
            r = run_emcee(model, start, walkers, steps, burn_in, moves, args.seed + n)
            print(f"peer {n:>5} observations, {label}: {walkers} walkers x {steps} steps: "
                  f"{r['cpu_seconds']:.1f} s on CPU ({r['wall_seconds']:.1f} s wall), "
                  f"tau_max {r['tau_max']:.1f}, {r['ess_per_second_cpu']:.0f} ESS per CPU second")
            runs[label] = r
        results.append({
            "observations": n,
            "us_per_eval": us,
            "us_per_eval_batched": us_batch,
            "batch": half,
            **runs["stretch"],
            "fit_moves": runs["fit_moves"],
        })
    doc = {
        "python": platform.python_version(),
        "numpy": np.__version__,
        "emcee": emcee.__version__,
        "burn_in": burn_in,
        "move": "emcee.moves.StretchMove(a=2.0), vectorize=True",
        "fit_moves": "[(emcee.moves.StretchMove(a=2.0), {stretch:g}), (emcee.moves.DEMove(), "
                     "{differential_evolution:g})], vectorize=True".format(**dyad["fit_moves_weights"]),
        "load_average_before": load_before,
        "load_average_after": load_average(),
        "data_sets": results,
    }
    Path(args.out, "peer_results.json").write_text(json.dumps(doc, indent=2))


def machine():
    cpu = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    try:
        rustc = subprocess.run(["rustc", "--version"], capture_output=True, text=True).stdout.strip()
    except OSError:
        rustc = "rustc unknown"
    return cpu, os.cpu_count(), rustc


def fmt(v, digits=1):
    return f"{v:,.{digits}f}"


def cmd_report(args):
    out = Path(args.out)
    dyad = json.loads((out / "dyad_results.json").read_text())
    peer = json.loads((out / "peer_results.json").read_text())
    check = json.loads((out / "check_ok.json").read_text())
    tau_check = json.loads((out / "check_tau_ok.json").read_text())
    cpu, ncpu, rustc = machine()
    when = datetime.datetime.now().astimezone().strftime("%a %d %b %Y %H:%M %Z")
    loads = [dyad["load_average_before"], dyad["load_average_after"],
             peer["load_average_before"], peer["load_average_after"]]
    load_text = ", ".join("?" if v is None else f"{v:.1f}" for v in loads)
    lines = [
        f"Run of {when} on {ncpu} cores ({cpu}); {rustc}; Python {peer['python']}, "
        f"numpy {peer['numpy']}, emcee {peer['emcee']}. 1-minute load average before/after "
        f"the dyad and the peer timings: {load_text}.",
        "",
        f"Checked before timing: the two log-posteriors agree to {check['max_relative_difference']:.1e} "
        f"relative at every check point; emcee's and dyad's autocorrelation estimates on the same "
        f"chain agree to {tau_check['max_relative_difference']:.1e}.",
        "",
        f"{dyad['walkers']} walkers, stretch move (a = 2), the same starting ensemble and burn-in "
        f"({dyad['burn_in']} steps) on both sides; dyad on 1 thread, NumPy on 1 thread. Times are "
        "on-CPU times of the process (the machine is shared; wall times are in the details). "
        "ESS/s = walkers x steps / (tau_max x run seconds).",
        "",
        "| observations | dyad us/eval | peer us/eval | ratio | dyad ESS/s | peer ESS/s | ratio |",
        "|---:|---:|---:|---:|---:|---:|---:|",
    ]
    peer_by_n = {d["observations"]: d for d in peer["data_sets"]}
    ratios = []
    for ds in dyad["data_sets"]:
        n = ds["observations"]
        p = peer_by_n[n]
        s = ds["serial"]
        r_eval = p["us_per_eval"] / ds["us_per_eval"]
        r_ess = s["ess_per_second_cpu"] / p["ess_per_second_cpu"]
        ratios.append((n, r_ess))
        lines.append(
            f"| {n} | {fmt(ds['us_per_eval'], 2)} | {fmt(p['us_per_eval'])} | {fmt(r_eval, 0)}x "
            f"| {fmt(s['ess_per_second_cpu'], 0)} | {fmt(p['ess_per_second_cpu'], 0)} | {fmt(r_ess, 1)}x |"
        )
    lines += [
        "",
        "The same runs with the moves `dyad fit` samples with (each walker, each step: "
        f"{mixture_text(dyad['fit_moves_weights'])}), against emcee's default move "
        "(stretch alone, the runs above) and against emcee given the same mixture "
        "(`StretchMove(a=2)` and `DEMove()` with those weights; emcee draws one move per step for "
        "the whole ensemble). ESS/s on 1 thread from CPU time; with 2 threads from wall time (the "
        "peer's wall and CPU times are equal, it runs on one core):",
        "",
        "| observations | dyad tau_max | dyad ESS/s, 1 thread | dyad ESS/s, 2 threads "
        "| emcee default: tau_max | ESS/s | ratio, 1 / 2 threads "
        "| emcee same mixture: tau_max | ESS/s | ratio, 1 / 2 threads | same chain on 2 threads |",
        "|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---|",
    ]
    mixture_ratios = []
    for ds in dyad["data_sets"]:
        n = ds["observations"]
        p = peer_by_n[n]
        m1, m2, pm = ds["fit_moves_serial"], ds["fit_moves_two_threads"], p["fit_moves"]
        vs_default = (m1["ess_per_second_cpu"] / p["ess_per_second_cpu"],
                      m2["ess_per_second_wall"] / p["ess_per_second_wall"])
        vs_same = (m1["ess_per_second_cpu"] / pm["ess_per_second_cpu"],
                   m2["ess_per_second_wall"] / pm["ess_per_second_wall"])
        mixture_ratios.append((n, vs_default, vs_same))
        lines.append(
            f"| {n} | {fmt(m1['tau_max'])} | {fmt(m1['ess_per_second_cpu'], 0)} "
            f"| {fmt(m2['ess_per_second_wall'], 0)} "
            f"| {fmt(p['tau_max'])} | {fmt(p['ess_per_second_cpu'], 0)} "
            f"| {vs_default[0]:,.1f}x / {vs_default[1]:,.1f}x "
            f"| {fmt(pm['tau_max'])} | {fmt(pm['ess_per_second_cpu'], 0)} "
            f"| {vs_same[0]:,.1f}x / {vs_same[1]:,.1f}x "
            f"| {'yes' if ds['fit_moves_two_threads_identical_chain'] else 'NO'} |"
        )
    batch = peer["data_sets"][0]["batch"]
    lines += [
        "",
        "Details of the sampling runs (tau_max: largest integrated autocorrelation time over the "
        "parameters, in steps, Sokal window c = 5; '>50 tau': kept steps exceed 50 tau_max; "
        f"batched: the peer's cost per point when {batch} points, one half-ensemble, are evaluated "
        "in one call, which is how emcee calls it; end-of-run: dyad's own diagnostics after the last "
        "step (R-hat, ESS, tau), on CPU, not in the timed section, like the peer's tau estimate):",
        "",
        "| observations | side | steps | CPU s | wall s | us/step (CPU) | tau_max | acceptance | >50 tau "
        "| ESS/s (wall) | batched us/point | end-of-run s |",
        "|---:|---|---:|---:|---:|---:|---:|---:|---|---:|---:|---:|",
    ]
    yes = lambda b: "yes" if b else "no"  # noqa: E731
    for ds in dyad["data_sets"]:
        n = ds["observations"]
        p = peer_by_n[n]
        s = ds["serial"]
        lines.append(
            f"| {n} | dyad | {s['steps']} | {fmt(s['cpu_seconds'], 2)} | {fmt(s['wall_seconds'], 2)} "
            f"| {fmt(s['us_per_step_cpu'])} | {fmt(s['tau_max'])} | {s['mean_acceptance']:.3f} "
            f"| {yes(s['tau_long_enough'])} | {fmt(s['ess_per_second_wall'], 0)} | "
            f"| {fmt(s['end_of_run_cpu_seconds'], 2)} |"
        )
        lines.append(
            f"| {n} | peer | {p['steps']} | {fmt(p['cpu_seconds'], 2)} | {fmt(p['wall_seconds'], 2)} "
            f"| {fmt(p['us_per_step_cpu'])} | {fmt(p['tau_max'])} | {p['mean_acceptance']:.3f} "
            f"| {yes(p['tau_long_enough'])} | {fmt(p['ess_per_second_wall'], 0)} "
            f"| {fmt(p['us_per_eval_batched'], 2)} | |"
        )
    lines += [
        "",
        f"dyad with observations and threads ({dyad['walkers']} walkers, same seed: the 2-thread chain "
        "must equal the 1-thread chain; speed-up and ESS/s from wall time, CPU ratio = CPU time on 2 "
        "threads over CPU time on 1):",
        "",
        "| observations | us/eval | wall us/step, 1 thread | wall us/step, 2 threads | speed-up | CPU ratio "
        "| ESS/s (wall), 1 thread | ESS/s (wall), 2 threads | same chain |",
        "|---:|---:|---:|---:|---:|---:|---:|---:|---|",
    ]
    for ds in dyad["data_sets"]:
        s, t = ds["serial"], ds["two_threads"]
        lines.append(
            f"| {ds['observations']} | {fmt(ds['us_per_eval'], 2)} | {fmt(s['us_per_step_wall'])} | "
            f"{fmt(t['us_per_step_wall'])} | {s['wall_seconds'] / t['wall_seconds']:.2f}x | "
            f"{t['cpu_seconds'] / s['cpu_seconds']:.2f} | {fmt(s['ess_per_second_wall'], 0)} | "
            f"{fmt(t['ess_per_second_wall'], 0)} | {'yes' if ds['two_threads_identical_chain'] else 'NO'} |"
        )
    lines += [
        "",
        "dyad with walkers (100 observations, 1 thread, same number of steps; on-CPU times; "
        "an ensemble needs more than twice the 15 parameters, so 16 walkers cannot be run):",
        "",
        "| walkers | us/step | us/walker-step | tau_max | ESS/s |",
        "|---:|---:|---:|---:|---:|",
    ]
    for r in dyad["walker_scaling_obs100"]:
        lines.append(
            f"| {r['walkers']} | {fmt(r['us_per_step_cpu'])} | {fmt(r['us_per_walker_step_cpu'], 2)} | "
            f"{fmt(r['tau_max'])} | {fmt(r['ess_per_second_cpu'], 0)} |"
        )
    verdict = ", ".join(
        f"{n} observations {r:,.1f}x ({'met' if r >= TARGET_RATIO else 'missed'})" for n, r in ratios
    )
    def met(r):
        return f"{r:,.1f}x ({'met' if r >= TARGET_RATIO else 'missed'})"

    lines += [
        "",
        f"Target, dyad at least {TARGET_RATIO:g}x the peer's ESS/s:",
        "",
        f"- same move (stretch) on both sides, 1 thread each: {verdict};",
        "- dyad with its fit moves against emcee's default move, 1 thread / dyad on 2 threads: "
        + ", ".join(f"{n} observations {met(d[0])} / {met(d[1])}" for n, d, _ in mixture_ratios) + ";",
        "- both with the same mixture, 1 thread / dyad on 2 threads: "
        + ", ".join(f"{n} observations {met(m[0])} / {met(m[1])}" for n, _, m in mixture_ratios) + ".",
    ]
    text = "\n".join(lines) + "\n"
    (out / "table.md").write_text(text)
    print(text)


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    sub = ap.add_subparsers(dest="command", required=True)
    for name in ("check", "check-tau", "time", "report"):
        p = sub.add_parser(name)
        p.add_argument("--out", required=True)
        if name == "time":
            p.add_argument("--steps", type=int, nargs=3, default=[40000, 40000, 40000],
                           metavar=("N20", "N100", "N1000"), help="emcee steps per data set")
            p.add_argument("--eval-seconds", type=float, default=0.3)
            p.add_argument("--eval-repeats", type=int, default=5)
            p.add_argument("--seed", type=int, default=20240917)
    args = ap.parse_args()
    {"check": cmd_check, "check-tau": cmd_check_tau, "time": cmd_time, "report": cmd_report}[args.command](args)


if __name__ == "__main__":
    main()
