//! Speed of the Kepler solver against one `f64::sin_cos` measured in the
//! same run, and of the batch `Orbit::states_into` against its solves.
//!
//! Run: `cargo bench -p dyad-orbit --bench kepler -- --warm-up-time 1 --measurement-time 3`.
//! All inputs are deterministic (a golden-ratio low-discrepancy sequence).

use criterion::{black_box, criterion_group, criterion_main, Criterion, Throughput};
use dyad_orbit::{
    solve_kepler, CampbellElements, EccentricAnomaly, KeplerSolver, Orbit, OrbitState,
};
use std::f64::consts::PI;

/// n points spread evenly over [lo, hi) (golden-ratio sequence, not sorted,
/// so branch predictors see the same mix as with real data).
fn spread(n: usize, lo: f64, hi: f64) -> Vec<f64> {
    const PHI_FRAC: f64 = 0.618_033_988_749_894_9;
    (0..n)
        .map(|k| lo + (hi - lo) * ((k as f64 + 0.5) * PHI_FRAC).fract())
        .collect()
}

fn bench_kepler(c: &mut Criterion) {
    let ms = spread(1000, -PI, PI);
    let mut group = c.benchmark_group("kepler");
    group.throughput(Throughput::Elements(ms.len() as u64));

    group.bench_function("sin_cos", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for &m in black_box(&ms) {
                let (s, c) = m.sin_cos();
                acc += s + c;
            }
            acc
        })
    });

    // Average over the grid e = 0, 0.05, ..., 0.95 (20 values x 50 M each),
    // one precomputed solver per eccentricity, interleaved.
    let solvers: Vec<KeplerSolver> = (0..20)
        .map(|k| KeplerSolver::new(k as f64 * 0.05).unwrap_or_else(|err| panic!("{err}")))
        .collect();
    let grid: Vec<(usize, f64)> = (0..1000).map(|k| (k % 20, ms[k])).collect();
    group.bench_function("solver_grid_e0-0.95", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for &(i, m) in black_box(&grid) {
                let s = solvers[i].solve_reduced(m);
                acc += s.sin_e + s.cos_e;
            }
            acc
        })
    });
    // The same 1000 (e, M) pairs through the batch interface: 50 M per e.
    let mut out = vec![
        EccentricAnomaly {
            e_anom: 0.0,
            sin_e: 0.0,
            cos_e: 1.0
        };
        50
    ];
    group.bench_function("solve_many_grid_e0-0.95", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for (i, solver) in solvers.iter().enumerate() {
                solver.solve_many(black_box(&ms[i * 50..(i + 1) * 50]), &mut out);
                acc += out[7].sin_e;
            }
            acc
        })
    });
    group.bench_function("free_function_grid_e0-0.95", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for &(i, m) in black_box(&grid) {
                let s = solve_kepler(m, i as f64 * 0.05);
                acc += s.sin_e + s.cos_e;
            }
            acc
        })
    });

    for e in [0.0, 0.5, 0.9] {
        let solver = KeplerSolver::new(e).unwrap_or_else(|err| panic!("{err}"));
        group.bench_function(format!("solver_e{e:.2}"), |b| {
            b.iter(|| {
                let mut acc = 0.0;
                for &m in black_box(&ms) {
                    let s = solver.solve_reduced(m);
                    acc += s.sin_e + s.cos_e;
                }
                acc
            })
        });
    }

    // The e -> 1, M -> 0 corner: e in {0.99, 0.999, 0.9999, 0.999999}, |M| < 0.1.
    let corner_solvers: Vec<KeplerSolver> = [0.99, 0.999, 0.9999, 0.999_999]
        .iter()
        .map(|&e| KeplerSolver::new(e).unwrap_or_else(|err| panic!("{err}")))
        .collect();
    let corner_m = spread(1000, -0.1, 0.1);
    let corner: Vec<(usize, f64)> = (0..1000).map(|k| (k % 4, corner_m[k])).collect();
    group.bench_function("solver_corner_e0.99-0.999999_M0.1", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for &(i, m) in black_box(&corner) {
                let s = corner_solvers[i].solve_reduced(m);
                acc += s.sin_e + s.cos_e;
            }
            acc
        })
    });
    let mut out = vec![
        EccentricAnomaly {
            e_anom: 0.0,
            sin_e: 0.0,
            cos_e: 1.0
        };
        250
    ];
    group.bench_function("solve_many_corner", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for (i, solver) in corner_solvers.iter().enumerate() {
                solver.solve_many(black_box(&corner_m[i * 250..(i + 1) * 250]), &mut out);
                acc += out[7].sin_e;
            }
            acc
        })
    });
    group.bench_function("free_function_corner", |b| {
        let es = [0.99, 0.999, 0.9999, 0.999_999];
        b.iter(|| {
            let mut acc = 0.0;
            for &(i, m) in black_box(&corner) {
                let s = solve_kepler(m, es[i]);
                acc += s.sin_e + s.cos_e;
            }
            acc
        })
    });
    group.finish();
}

fn bench_batch(c: &mut Criterion) {
    let el = CampbellElements {
        period_days: 3652.5,
        t_peri_jd: 2_451_000.0,
        e: 0.45,
        a: 120.0,
        inc_rad: 1.1,
        omega_rad: 2.2,
        node_rad: 0.7,
    };
    let orbit = Orbit::new(&el).unwrap_or_else(|err| panic!("{err}"));
    let solver = KeplerSolver::new(el.e).unwrap_or_else(|err| panic!("{err}"));
    let times = spread(100, 2_448_000.0, 2_460_000.0);
    let mut out = vec![OrbitState::default(); times.len()];
    let mut group = c.benchmark_group("batch100");
    group.bench_function("orbit_new_once", |b| {
        b.iter(|| Orbit::new(black_box(&el)).map(|o| o.mean_anomaly(0.0)))
    });
    group.throughput(Throughput::Elements(times.len() as u64));
    group.bench_function("states_into", |b| {
        b.iter(|| {
            orbit.states_into(black_box(&times), &mut out);
            out[0].dra
        })
    });
    // The 100 solves alone, on the same mean anomalies.
    let ms: Vec<f64> = times.iter().map(|&t| orbit.mean_anomaly(t)).collect();
    let mut ea = vec![
        EccentricAnomaly {
            e_anom: 0.0,
            sin_e: 0.0,
            cos_e: 1.0
        };
        ms.len()
    ];
    group.bench_function("solve_many_only", |b| {
        b.iter(|| {
            solver.solve_many(black_box(&ms), &mut ea);
            ea[0].sin_e
        })
    });
    group.bench_function("scalar_solves_only", |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for &m in black_box(&ms) {
                let s = solver.solve_reduced(m);
                acc += s.sin_e + s.cos_e;
            }
            acc
        })
    });
    group.finish();
}

/// Ratios to one `f64::sin_cos`, robust to a busy machine: the workloads are
/// timed in alternating rounds and the fastest round of each is kept
/// (preemption only ever adds time). Printed as a table before the
/// criterion runs.
fn ratio_table(_c: &mut Criterion) {
    use std::time::Instant;
    let ms = spread(1000, -PI, PI);
    let solvers: Vec<KeplerSolver> = (0..20)
        .map(|k| KeplerSolver::new(k as f64 * 0.05).unwrap_or_else(|err| panic!("{err}")))
        .collect();
    let corner_solvers: Vec<KeplerSolver> = [0.99, 0.999, 0.9999, 0.999_999]
        .iter()
        .map(|&e| KeplerSolver::new(e).unwrap_or_else(|err| panic!("{err}")))
        .collect();
    let corner_m = spread(1000, -0.1, 0.1);
    let el = CampbellElements {
        period_days: 3652.5,
        t_peri_jd: 2_451_000.0,
        e: 0.45,
        a: 120.0,
        inc_rad: 1.1,
        omega_rad: 2.2,
        node_rad: 0.7,
    };
    let orbit = Orbit::new(&el).unwrap_or_else(|err| panic!("{err}"));
    let times = spread(100, 2_448_000.0, 2_460_000.0);
    let batch_m: Vec<f64> = times.iter().map(|&t| orbit.mean_anomaly(t)).collect();
    let batch_solver = KeplerSolver::new(el.e).unwrap_or_else(|err| panic!("{err}"));
    let mut ea = vec![
        EccentricAnomaly {
            e_anom: 0.0,
            sin_e: 0.0,
            cos_e: 1.0
        };
        1000
    ];
    let mut states = vec![OrbitState::default(); 100];

    let names = [
        "f64::sin_cos",
        "KeplerSolver::solve, e grid 0..0.95",
        "KeplerSolver::solve_many, e grid 0..0.95",
        "KeplerSolver::solve, corner",
        "KeplerSolver::solve_many, corner",
        "solve_kepler (no table), e grid 0..0.95",
        "Orbit::states_into, 100 epochs (per epoch)",
        "solve_many, same 100 epochs (per epoch)",
        "Orbit::new (per call)",
    ];
    let mut best = [f64::INFINITY; 9];
    let reps = 20;
    for _round in 0..60 {
        let mut times_ns = [0.0; 9];
        let t = Instant::now();
        let mut acc = 0.0;
        for _ in 0..reps {
            for &m in black_box(&ms) {
                let (s, c) = m.sin_cos();
                acc += s + c;
            }
        }
        times_ns[0] = t.elapsed().as_nanos() as f64 / (reps * 1000) as f64;
        let t = Instant::now();
        for _ in 0..reps {
            for (k, &m) in black_box(&ms).iter().enumerate() {
                let s = solvers[k % 20].solve_reduced(m);
                acc += s.sin_e + s.cos_e;
            }
        }
        times_ns[1] = t.elapsed().as_nanos() as f64 / (reps * 1000) as f64;
        let t = Instant::now();
        for _ in 0..reps {
            for (i, solver) in solvers.iter().enumerate() {
                solver.solve_many(black_box(&ms[i * 50..(i + 1) * 50]), &mut ea[..50]);
                acc += ea[7].sin_e;
            }
        }
        times_ns[2] = t.elapsed().as_nanos() as f64 / (reps * 1000) as f64;
        let t = Instant::now();
        for _ in 0..reps {
            for (k, &m) in black_box(&corner_m).iter().enumerate() {
                let s = corner_solvers[k % 4].solve_reduced(m);
                acc += s.sin_e + s.cos_e;
            }
        }
        times_ns[3] = t.elapsed().as_nanos() as f64 / (reps * 1000) as f64;
        let t = Instant::now();
        for _ in 0..reps {
            for (i, solver) in corner_solvers.iter().enumerate() {
                solver.solve_many(black_box(&corner_m[i * 250..(i + 1) * 250]), &mut ea[..250]);
                acc += ea[7].sin_e;
            }
        }
        times_ns[4] = t.elapsed().as_nanos() as f64 / (reps * 1000) as f64;
        let t = Instant::now();
        for _ in 0..reps {
            for (k, &m) in black_box(&ms).iter().enumerate() {
                let s = solve_kepler(m, (k % 20) as f64 * 0.05);
                acc += s.sin_e + s.cos_e;
            }
        }
        times_ns[5] = t.elapsed().as_nanos() as f64 / (reps * 1000) as f64;
        let t = Instant::now();
        for _ in 0..reps * 10 {
            orbit.states_into(black_box(&times), &mut states);
            acc += states[3].dra;
        }
        times_ns[6] = t.elapsed().as_nanos() as f64 / (reps * 1000) as f64;
        let t = Instant::now();
        for _ in 0..reps * 10 {
            batch_solver.solve_many(black_box(&batch_m), &mut ea[..100]);
            acc += ea[3].sin_e;
        }
        times_ns[7] = t.elapsed().as_nanos() as f64 / (reps * 1000) as f64;
        let t = Instant::now();
        for k in 0..reps * 10 {
            let el = CampbellElements {
                e: 0.001 * (k % 100) as f64,
                ..el
            };
            acc += Orbit::new(black_box(&el)).map_or(0.0, |o| o.mean_anomaly(0.0));
        }
        times_ns[8] = t.elapsed().as_nanos() as f64 / (reps * 10) as f64;
        black_box(acc);
        for (b, t) in best.iter_mut().zip(times_ns) {
            *b = b.min(t);
        }
    }
    println!("\nfastest of 60 alternating rounds (ns per solve; ratio to one sin_cos):");
    for (name, b) in names.iter().zip(best) {
        println!("  {name:<45} {b:8.2} ns  {:6.2}", b / best[0]);
    }
    println!("  states_into / its solves: {:.2}\n", best[6] / best[7]);
}

criterion_group!(benches, ratio_table, bench_kepler, bench_batch);
criterion_main!(benches);
