//! Speed of the Kepler solver against one `f64::sin_cos` measured in the
//! same run, and of the batch `Orbit::states_into` against its solves.
//!
//! Run: `cargo bench -p dyad-orbit --bench kepler -- --warm-up-time 1 --measurement-time 3`.
//! All inputs are deterministic (a golden-ratio low-discrepancy sequence).

use criterion::{black_box, criterion_group, criterion_main, Criterion, Throughput};
use dyad_orbit::{solve_kepler, CampbellElements, KeplerSolver, Orbit, OrbitState};
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
    group.bench_function("solves_only", |b| {
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

criterion_group!(benches, bench_kepler, bench_batch);
criterion_main!(benches);
