//! Next-epoch advice at survey scale: 10^4 posterior draws x 10^3 candidate
//! dates, 32 simulated outcomes per date, a 2-component measurement whose
//! prediction costs a few trigonometric calls per draw (a stand-in for the
//! Kepler solve; `dyad advise` timing on a real run is in the README).

use criterion::{criterion_group, criterion_main, Criterion};
use dyad_plan::{expected_widths, Observable, PlanSettings, Target};

struct Circular {
    phase: Vec<f64>,
    radius: Vec<f64>,
}

impl Observable for Circular {
    fn components(&self) -> usize {
        2
    }
    fn predict(&self, draw: usize, t: f64, out: &mut [f64]) -> bool {
        let (s, c) = (t * 0.01 + self.phase[draw]).sin_cos();
        out[0] = self.radius[draw] * s;
        out[1] = self.radius[draw] * c;
        true
    }
}

fn bench(c: &mut Criterion) {
    let n = 10_000;
    let phase: Vec<f64> = (0..n).map(|i| (i as f64 * 0.618_034).fract()).collect();
    let radius: Vec<f64> = (0..n)
        .map(|i| 100.0 + (i as f64 * 0.414_2).fract())
        .collect();
    let m1: Vec<f64> = radius.iter().map(|r| r / 100.0).collect();
    let m2: Vec<f64> = phase.iter().map(|p| 0.5 + p).collect();
    let obs = Circular { phase, radius };
    let targets = [
        Target {
            name: "m1",
            values: &m1,
        },
        Target {
            name: "m2",
            values: &m2,
        },
    ];
    let dates: Vec<f64> = (0..1000).map(|k| k as f64).collect();
    let settings = PlanSettings {
        error: 0.5,
        outcomes: 32,
        seed: 1,
    };
    let mut group = c.benchmark_group("advice");
    group.sample_size(10);
    group.bench_function("1e4 draws x 1e3 dates x 32 outcomes", |b| {
        b.iter(|| expected_widths(&obs, n, &targets, &dates, settings).unwrap())
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
