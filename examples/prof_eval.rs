use dyad_model::load::load_dataset;
use dyad_model::{likelihood::Model, params::ModelPriors};
use std::path::Path;
fn main() {
    let args: Vec<String> = std::env::args().collect();
    let dir = Path::new(&args[1]);
    let what = args.get(2).map(|s| s.as_str()).unwrap_or("post");
    let dataset = load_dataset(
        Some(&dir.join("positions.csv")),
        &[&dir.join("velocities.csv")],
    )
    .unwrap();
    let priors = ModelPriors::defaults(&dataset);
    let model = Model::new(dataset, &priors).unwrap();
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("check.json")).unwrap()).unwrap();
    let pts: Vec<Vec<f64>> = doc["check_points"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|p| p["log_posterior"].as_f64().is_some())
        .map(|p| {
            p["x"]
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap())
                .collect()
        })
        .collect();
    let n = 2_000_000usize;
    let t = std::time::Instant::now();
    let mut s = 0.0;
    for k in 0..n {
        let x = &pts[k % pts.len()];
        s += match what {
            "prior" => model.log_prior(x),
            "orbital" => model
                .layout()
                .orbital(x)
                .map(|o| o.period_days)
                .unwrap_or(0.0),
            _ => model.log_posterior(x),
        };
    }
    println!(
        "{what}: {:.3} us/eval ({s})",
        t.elapsed().as_secs_f64() / n as f64 * 1e6
    );
}
