//! Every plot on synthetic inputs: writes PNG + SVG, the PNG decodes, has
//! the stated size and is not blank. The PNGs are kept under
//! `target/plot-previews/` (CARGO_TARGET_TMPDIR) for looking at by eye.

use dyad_report::*;
use std::path::{Path, PathBuf};

/// Deterministic pseudo-random numbers (SplitMix64, Steele, Lea & Flood
/// 2014, "Fast splittable pseudorandom number generators"), so the test
/// inputs need no RNG crate.
struct SplitMix(u64);
impl SplitMix {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Standard normal by Box-Muller.
    fn normal(&mut self) -> f64 {
        let u1 = self.uniform().max(1e-300);
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }
}

fn preview_dir() -> PathBuf {
    let d = Path::new(env!("CARGO_TARGET_TMPDIR")).join("plot-previews");
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Decodes the PNG, checks its size and that it is not blank (grey-level
/// variance above a threshold), checks the SVG is an SVG document.
fn check_files(files: &PlotFiles, width: u32, height: u32) {
    let img = image::open(&files.png).expect("PNG decodes").to_rgb8();
    assert_eq!(img.dimensions(), (width, height), "{}", files.png.display());
    let n = (width * height) as f64;
    let (mut s, mut s2) = (0.0, 0.0);
    let mut non_white = 0usize;
    for p in img.pixels() {
        let g = (p[0] as f64 + p[1] as f64 + p[2] as f64) / 3.0;
        s += g;
        s2 += g * g;
        if g < 250.0 {
            non_white += 1;
        }
    }
    let var = s2 / n - (s / n).powi(2);
    assert!(
        var > 100.0,
        "{} looks blank (variance {var})",
        files.png.display()
    );
    assert!(
        non_white as f64 > 0.02 * n,
        "{}: too little ink",
        files.png.display()
    );
    let svg = std::fs::read_to_string(&files.svg).unwrap();
    assert!(svg.contains("<svg") && svg.trim_end().ends_with("</svg>"));
    assert!(svg.contains("<text"), "SVG has text");
    // No temporary files of this plot left beside the outputs (other
    // tests write into the same folder concurrently, so match our names).
    let dir = files.png.parent().unwrap();
    let own = format!(".{}", files.png.file_name().unwrap().to_string_lossy());
    let own_svg = format!(".{}", files.svg.file_name().unwrap().to_string_lossy());
    for e in std::fs::read_dir(dir).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        let ours = name.starts_with(&own) || name.starts_with(&own_svg);
        assert!(!(ours && name.contains(".tmp-")), "temp file left: {name}");
    }
}

fn png_size(path: &Path) -> (u32, u32) {
    image::image_dimensions(path).unwrap()
}

/// Correlated draws of (m1, m2, omega) with omega straddling 0/360.
fn pair_draws(n: usize) -> PosteriorDraws {
    let mut rng = SplitMix(7);
    let mut values = Vec::with_capacity(4 * n);
    let mut lp = Vec::with_capacity(n);
    for _ in 0..n {
        let (z1, z2, z3) = (rng.normal(), rng.normal(), rng.normal());
        let m1 = 1.32 + 0.06 * z1;
        let m2 = 0.81 + 0.04 * (0.7 * z1 + 0.71 * z2);
        let omega = (3.0 + 6.0 * z3).rem_euclid(360.0);
        values.extend([m1, m2, omega, m1 + m2]);
        lp.push(-0.5 * (z1 * z1 + z2 * z2 + z3 * z3));
    }
    PosteriorDraws::new(
        vec![
            ParameterInfo::linear("m1", "M☉", "M₁"),
            ParameterInfo::linear("m2", "M☉", "M₂"),
            ParameterInfo::angle("omega", "deg", "ω", 360.0),
            ParameterInfo::linear("m_total", "M☉", "M₁+M₂"),
        ],
        values,
        lp,
    )
    .unwrap()
}

#[test]
fn pair_plot_writes_png_and_svg() {
    let dir = preview_dir();
    let d = pair_draws(6000);
    let files = plot_pairs(
        &dir.join("pairs"),
        "Posterior of the invented system Tarn-7",
        &d,
        &["m1", "m2", "omega"],
    )
    .unwrap();
    let (w, h) = png_size(&files.png);
    assert!(w > 600 && h > 600);
    check_files(&files, w, h);
    assert!(plot_pairs(&dir.join("bad"), "x", &d, &["nope"]).is_err());
}

/// Relative orbit by the Thiele-Innes formulas of docs/DESIGN.md, Kepler's
/// equation by Newton iteration.
fn orbit_track(a: f64, e: f64, i: f64, w: f64, node: f64, n: usize) -> Vec<(f64, f64)> {
    let (ca, cb, cf, cg) = (
        a * (w.cos() * node.cos() - w.sin() * node.sin() * i.cos()),
        a * (w.cos() * node.sin() + w.sin() * node.cos() * i.cos()),
        a * (-w.sin() * node.cos() - w.cos() * node.sin() * i.cos()),
        a * (-w.sin() * node.sin() + w.cos() * node.cos() * i.cos()),
    );
    (0..=n)
        .map(|k| {
            let m = std::f64::consts::TAU * k as f64 / n as f64;
            let mut ea = m;
            for _ in 0..30 {
                ea -= (ea - e * ea.sin() - m) / (1.0 - e * ea.cos());
            }
            let x = ea.cos() - e;
            let y = (1.0 - e * e).sqrt() * ea.sin();
            (cb * x + cg * y, ca * x + cf * y) // (dRA*, dDec)
        })
        .collect()
}

#[test]
fn sky_plot_writes_png_and_svg() {
    let dir = preview_dir();
    let mut rng = SplitMix(11);
    let deg = std::f64::consts::PI / 180.0;
    let best = orbit_track(120.0, 0.45, 50.0 * deg, 60.0 * deg, 130.0 * deg, 300);
    let tracks: Vec<Vec<(f64, f64)>> = (0..100)
        .map(|_| {
            orbit_track(
                120.0 + 4.0 * rng.normal(),
                0.45 + 0.02 * rng.normal(),
                (50.0 + 2.0 * rng.normal()) * deg,
                (60.0 + 3.0 * rng.normal()) * deg,
                (130.0 + 2.0 * rng.normal()) * deg,
                300,
            )
        })
        .collect();
    let measurements: Vec<SkyMeasurement> = (0..9)
        .map(|k| {
            let p = best[k * 20];
            let (sx, sy, rho) = (2.0 + k as f64 * 0.3, 3.0, 0.4);
            SkyMeasurement {
                dra: p.0 + sx * rng.normal(),
                ddec: p.1 + sy * rng.normal(),
                cov: [[sx * sx, rho * sx * sy], [rho * sx * sy, sy * sy]],
                label: format!("epoch {k}"),
                model: Some(p),
            }
        })
        .collect();
    let predictions = vec![
        SkyPrediction {
            dra: best[230].0,
            ddec: best[230].1,
            cov: Some([[9.0, 0.0], [0.0, 16.0]]),
            label: "2027.5".into(),
        },
        SkyPrediction {
            dra: best[260].0,
            ddec: best[260].1,
            cov: None,
            label: "2028.5".into(),
        },
    ];
    let input = SkyPlotInput {
        title: "Relative orbit of Tarn-7 B around A".into(),
        measurements,
        tracks,
        best_track: Some(best.clone()),
        predictions,
        nodes: Some(LineOfNodes {
            ascending: best[40],
            descending: best[190],
            ascending_known: true,
        }),
        periastron: Some(best[0]),
    };
    let files = plot_sky(&dir.join("sky"), &input).unwrap();
    check_files(&files, 1000, 1060);
    assert!(plot_sky(&dir.join("empty"), &SkyPlotInput::default()).is_err());
}

/// Kepler velocity curve of docs/DESIGN.md: v_rel = K (cos(nu + w) + e cos w).
fn rv_rel(phase: f64, k: f64, e: f64, w: f64) -> f64 {
    let m = std::f64::consts::TAU * phase;
    let mut ea = m;
    for _ in 0..30 {
        ea -= (ea - e * ea.sin() - m) / (1.0 - e * ea.cos());
    }
    let nu = 2.0 * ((1.0 + e).sqrt() * (0.5 * ea).sin()).atan2((1.0 - e).sqrt() * (0.5 * ea).cos());
    k * ((nu + w).cos() + e * w.cos())
}

#[test]
fn velocity_plot_writes_png_and_svg() {
    let dir = preview_dir();
    let mut rng = SplitMix(3);
    let (p, t0, k, e, w, q) = (412.0, 2_458_000.3, 38.0, 0.35, 1.1, 0.62);
    let (f1, f2) = (q / (1.0 + q), 1.0 / (1.0 + q));
    let mut points = Vec::new();
    for i in 0..40 {
        let t = t0 + 37.3 * i as f64 + 3.0 * rng.uniform();
        let ph = ((t - t0) / p).rem_euclid(1.0);
        let vr = rv_rel(ph, k, e, w);
        let inst = if i % 3 == 0 {
            "echelle-north"
        } else {
            "fibre-south"
        };
        let err = if i % 3 == 0 { 0.8 } else { 1.5 };
        let n1 = err * rng.normal();
        points.push(VelocityPoint {
            t_jd: t,
            rv_kms: -f1 * vr + n1,
            err_kms: err,
            residual_kms: n1,
            star: Star::Primary,
            instrument: inst.into(),
        });
        if i % 2 == 0 {
            let n2 = 2.0 * err * rng.normal();
            points.push(VelocityPoint {
                t_jd: t,
                rv_kms: f2 * vr + n2,
                err_kms: 2.0 * err,
                residual_kms: n2,
                star: Star::Secondary,
                instrument: inst.into(),
            });
        }
    }
    let grid: Vec<f64> = (0..=400).map(|i| i as f64 / 400.0).collect();
    let input = VelocityPlotInput {
        title: "Radial velocities of Tarn-7, folded on P = 412.0 d".into(),
        period_days: p,
        t_peri_jd: t0,
        points,
        model_primary: grid
            .iter()
            .map(|&ph| (ph, -f1 * rv_rel(ph, k, e, w)))
            .collect(),
        model_secondary: grid
            .iter()
            .map(|&ph| (ph, f2 * rv_rel(ph, k, e, w)))
            .collect(),
    };
    let files = plot_velocity_curves(&dir.join("velocity"), &input).unwrap();
    check_files(&files, 1200, 900);
    let bad = VelocityPlotInput {
        period_days: 0.0,
        ..input.clone()
    };
    assert!(plot_velocity_curves(&dir.join("bad"), &bad).is_err());
}

#[test]
fn mass_plot_writes_png_and_svg() {
    let dir = preview_dir();
    let mut rng = SplitMix(5);
    let n = 8000;
    let (mut m1, mut m2, mut mt, mut q) = (vec![], vec![], vec![], vec![]);
    for _ in 0..n {
        let a = 1.32 * (1.0 + 0.05 * rng.normal());
        let b = 0.81 * (1.0 + 0.07 * rng.normal());
        m1.push(a);
        m2.push(b);
        mt.push(a + b);
        q.push(b / a);
    }
    let panel = |label: &str, unit: &str, values: Vec<f64>| DistributionPanel {
        label: label.into(),
        unit: unit.into(),
        values,
    };
    let panels = vec![
        panel("M₁", "M☉", m1),
        panel("M₂", "M☉", m2),
        panel("M₁ + M₂", "M☉", mt),
        panel("q = M₂/M₁", "", q),
    ];
    let files = plot_mass_distributions(&dir.join("masses"), "Masses of Tarn-7", &panels).unwrap();
    check_files(&files, 1200, 920);
    assert!(plot_mass_distributions(&dir.join("bad"), "x", &[]).is_err());
}

#[test]
fn period_window_plot_writes_png_and_svg() {
    let dir = preview_dir();
    let mass = |name: &str, m: f64, s: f64| MassInterval {
        name: name.into(),
        median: m,
        lo68: m - s,
        hi68: m + 1.1 * s,
        lo95: m - 2.1 * s,
        hi95: m + 2.3 * s,
    };
    let windows = vec![
        WindowSummary {
            label: "A".into(),
            p_lo_days: 380.0,
            p_hi_days: 450.0,
            probability: 0.71,
            probability_err: 0.04,
            ln_z: -152.31,
            ln_z_err: 0.12,
            masses: vec![
                mass("M₁ + M₂", 2.1, 0.1),
                mass("M₁", 1.3, 0.08),
                mass("M₂", 0.8, 0.06),
            ],
        },
        WindowSummary {
            label: "B".into(),
            p_lo_days: 760.0,
            p_hi_days: 900.0,
            probability: 0.26,
            probability_err: 0.04,
            ln_z: -153.31,
            ln_z_err: 0.15,
            masses: vec![
                mass("M₁ + M₂", 3.4, 0.3),
                mass("M₁", 2.0, 0.2),
                mass("M₂", 1.4, 0.15),
            ],
        },
        WindowSummary {
            label: "C".into(),
            p_lo_days: 1500.0,
            p_hi_days: 2100.0,
            probability: 0.03,
            probability_err: 0.01,
            ln_z: -155.5,
            ln_z_err: 0.2,
            masses: vec![mass("M₁ + M₂", 5.6, 0.8)],
        },
    ];
    let files = plot_period_windows(
        &dir.join("periods"),
        "Which periods do the data allow?",
        &windows,
    )
    .unwrap();
    let (w, h) = png_size(&files.png);
    check_files(&files, w, h);
    assert!(plot_period_windows(&dir.join("bad"), "x", &[]).is_err());
}

#[test]
fn rank_histogram_plot_writes_png_and_svg() {
    let dir = preview_dir();
    let mut rng = SplitMix(9);
    let l = 99;
    let inputs: Vec<RankHistogramInput> = ["ln P", "e", "cos i", "M₁ + M₂"]
        .iter()
        .enumerate()
        .map(|(k, name)| RankHistogramInput {
            label: (*name).into(),
            ranks: (0..500)
                .map(|_| {
                    let u = rng.uniform();
                    // The last parameter is miscalibrated (ranks pile up in the middle).
                    let u = if k == 3 { 0.5 + 0.6 * (u - 0.5) } else { u };
                    ((u * (l + 1) as f64) as usize).min(l)
                })
                .collect(),
        })
        .collect();
    let files = plot_rank_histograms(
        &dir.join("ranks"),
        "Simulation-based calibration: rank histograms",
        &inputs,
        l,
        20,
    )
    .unwrap();
    check_files(&files, 3 * 460, 96 + 2 * 360);
    assert!(plot_rank_histograms(&dir.join("bad"), "x", &inputs, 10, 20).is_err());
}

#[test]
fn sky_plot_of_a_short_arc_without_best_orbit() {
    // A sparse case: five positions on a short arc, widely different
    // posterior orbits, no best orbit and no predictions.
    let dir = preview_dir();
    let mut rng = SplitMix(13);
    let deg = std::f64::consts::PI / 180.0;
    let tracks: Vec<Vec<(f64, f64)>> = (0..100)
        .map(|_| {
            orbit_track(
                300.0 * (1.0 + 0.3 * rng.normal()).abs().max(0.3),
                (0.3 + 0.2 * rng.normal()).clamp(0.0, 0.9),
                (120.0 + 10.0 * rng.normal()) * deg,
                (200.0 + 20.0 * rng.normal()) * deg,
                (30.0 + 5.0 * rng.normal()) * deg,
                200,
            )
        })
        .collect();
    let measurements = (0..5)
        .map(|k| SkyMeasurement {
            dra: 150.0 + 8.0 * k as f64,
            ddec: 220.0 - 5.0 * k as f64,
            cov: [[4.0, -1.0], [-1.0, 2.0]],
            label: String::new(),
            model: None,
        })
        .collect();
    let input = SkyPlotInput {
        title: "Short arc: invented pair Corrie-2".into(),
        measurements,
        tracks,
        best_track: None,
        predictions: vec![],
        ..SkyPlotInput::default()
    };
    let files = plot_sky(&dir.join("sky_short_arc"), &input).unwrap();
    check_files(&files, 1000, 1060);
}

/// Median pixel position (as fractions of width and height) of the
/// measurement colour (Okabe-Ito vermillion, 213/94/0). The median is
/// dominated by the drawn ellipse; the small legend marker cannot move it.
fn vermillion_centroid(path: &Path) -> (f64, f64) {
    let img = image::open(path).unwrap().to_rgb8();
    let (w, h) = img.dimensions();
    let (mut xs, mut ys) = (Vec::new(), Vec::new());
    for (x, y, p) in img.enumerate_pixels() {
        let close = (p[0] as i32 - 213).abs() < 25 && (p[1] as i32 - 94).abs() < 25 && p[2] < 40;
        if close {
            xs.push(x);
            ys.push(y);
        }
    }
    assert!(
        xs.len() > 100,
        "measurement not found in {}",
        path.display()
    );
    xs.sort_unstable();
    ys.sort_unstable();
    (
        xs[xs.len() / 2] as f64 / w as f64,
        ys[ys.len() / 2] as f64 / h as f64,
    )
}

#[test]
fn sky_plot_puts_east_left_and_north_up() {
    // Convention (docs/DESIGN.md; common practice): ΔRA* > 0 is East, drawn to
    // the left of the primary; ΔDec > 0 is North, drawn above it. The view
    // is centred between the primary and the measurement, so the
    // measurement must fall in the left (upper) half.
    let dir = preview_dir();
    let one = |dra: f64, ddec: f64| SkyPlotInput {
        title: "orientation check".into(),
        measurements: vec![SkyMeasurement {
            dra,
            ddec,
            cov: [[25.0, 0.0], [0.0, 25.0]],
            label: String::new(),
            model: None,
        }],
        ..SkyPlotInput::default()
    };
    let east = plot_sky(&dir.join("orient_east"), &one(100.0, 10.0)).unwrap();
    let (x, _) = vermillion_centroid(&east.png);
    assert!(x < 0.45, "East measurement drawn at x = {x} of the width");
    let north = plot_sky(&dir.join("orient_north"), &one(10.0, 100.0)).unwrap();
    let (_, y) = vermillion_centroid(&north.png);
    assert!(y < 0.45, "North measurement drawn at y = {y} of the height");
}

#[test]
fn pair_plot_with_six_awkward_parameters() {
    // Large offsets (a JD), tiny numbers, a node known modulo 180 deg.
    let dir = preview_dir();
    let mut rng = SplitMix(21);
    let n = 4000;
    let mut values = Vec::with_capacity(6 * n);
    let mut lp = Vec::with_capacity(n);
    for _ in 0..n {
        let z: Vec<f64> = (0..6).map(|_| rng.normal()).collect();
        values.extend([
            2_458_123.4 + 3.2 * z[0],
            (179.0 + 2.5 * z[1]).rem_euclid(180.0),
            0.000_42 + 0.000_03 * z[2],
            412.0 + 6.0 * (0.8 * z[0] + 0.6 * z[3]),
            0.35 + 0.02 * z[4],
            -12.3 + 0.4 * z[5],
        ]);
        lp.push(-0.5 * z.iter().map(|v| v * v).sum::<f64>());
    }
    let d = PosteriorDraws::new(
        vec![
            ParameterInfo::linear("t_peri", "JD", "T"),
            ParameterInfo::angle("node", "deg", "Ω", 180.0),
            ParameterInfo::linear("tiny", "", "ε"),
            ParameterInfo::linear("period", "d", "P"),
            ParameterInfo::linear("e", "", "e"),
            ParameterInfo::linear("gamma", "km/s", "γ"),
        ],
        values,
        lp,
    )
    .unwrap();
    let names = ["t_peri", "node", "tiny", "period", "e", "gamma"];
    let files = plot_pairs(&dir.join("pairs6"), "Six parameters", &d, &names).unwrap();
    let (w, h) = png_size(&files.png);
    check_files(&files, w, h);
}

#[test]
fn separation_and_angle_plot_draws_bands_and_rejects_mismatched_lengths() {
    // An invented orbit whose position angle passes 360 once in the window.
    let dir = preview_dir();
    let n = 200;
    let times: Vec<f64> = (0..n)
        .map(|k| 2000.0 + 20.0 * k as f64 / (n - 1) as f64)
        .collect();
    let sep: Vec<f64> = times
        .iter()
        .map(|t| 300.0 + 80.0 * (0.3 * t).sin())
        .collect();
    let pa: Vec<f64> = times.iter().map(|t| 250.0 + 12.0 * (t - 2000.0)).collect();
    let band = |v: &[f64], w: f64| Band {
        median: v.to_vec(),
        q68: v.iter().map(|x| [x - w, x + w]).collect(),
        q95: v.iter().map(|x| [x - 2.0 * w, x + 2.0 * w]).collect(),
    };
    let points = (0..12)
        .map(|k| {
            let i = 8 + 15 * k;
            PolarPoint {
                t_year: times[i],
                sep_mas: sep[i] + 3.0,
                sep_err_mas: 4.0,
                pa_deg: pa[i] - 0.5,
                pa_err_deg: 0.7,
                sep_oc_mas: 3.0,
                pa_oc_deg: -0.5,
                source: if k % 2 == 0 { "speckle" } else { "imaging" }.into(),
            }
        })
        .collect();
    let input = SeparationPlotInput {
        title: "Separation and position angle of Tarn-7".into(),
        time_label: "Epoch [Julian year]".into(),
        times_year: times.clone(),
        separation: band(&sep, 5.0),
        position_angle: band(&pa, 2.0),
        best_separation: sep.clone(),
        best_position_angle: pa.clone(),
        points,
    };
    let files = plot_separation_and_angle(&dir.join("separation"), &input).unwrap();
    check_files(&files, 1200, 1300);
    let short = SeparationPlotInput {
        best_separation: sep[..10].to_vec(),
        ..input
    };
    assert!(plot_separation_and_angle(&dir.join("bad_separation"), &short).is_err());
}

#[test]
fn ephemeris_plot_draws_each_mode_and_rejects_mismatched_lengths() {
    // Two invented modes; the position angle of the first passes 360 in the
    // window and its band straddles north there.
    let dir = preview_dir();
    let n = 120;
    let times: Vec<f64> = (0..n)
        .map(|k| 2027.0 + 6.0 * k as f64 / (n - 1) as f64)
        .collect();
    let band = |v: Vec<f64>, w: f64, angle: bool| Band {
        median: v
            .iter()
            .map(|x| if angle { x.rem_euclid(360.0) } else { *x })
            .collect(),
        q68: v
            .iter()
            .map(|x| {
                let m = if angle { x.rem_euclid(360.0) } else { *x };
                [m - w, m + w]
            })
            .collect(),
        q95: v
            .iter()
            .map(|x| {
                let m = if angle { x.rem_euclid(360.0) } else { *x };
                [m - 2.0 * w * (1.0 + 0.3 * (x * 0.01).sin()), m + 2.0 * w]
            })
            .collect(),
    };
    let along = |f: &dyn Fn(f64) -> f64| times.iter().map(|&t| f(t - 2027.0)).collect();
    let panel = |label: &str, angle: bool, modes: Vec<Band>| EphemerisPanel {
        axis_label: label.into(),
        angle,
        modes,
    };
    let input = EphemerisPlotInput {
        title: "Ephemeris of Tarn-7".into(),
        time_label: "Epoch [Julian year]".into(),
        times: times.clone(),
        mode_labels: vec![
            "mode 1: P = 4.10 yr, weight 0.71".into(),
            "mode 2: P = 8.20 yr, weight 0.29".into(),
        ],
        panels: vec![
            panel(
                "Separation ρ [mas]",
                false,
                vec![
                    band(along(&|t| 120.0 + 40.0 * (1.5 * t).sin()), 4.0, false),
                    band(along(&|t| 150.0 + 20.0 * (0.8 * t).cos()), 9.0, false),
                ],
            ),
            panel(
                "Position angle θ [deg]",
                true,
                vec![
                    band(along(&|t| 300.0 + 25.0 * t), 5.0, true),
                    band(along(&|t| 200.0 + 10.0 * t), 12.0, true),
                ],
            ),
            panel(
                "Primary velocity [km/s]",
                false,
                vec![
                    band(along(&|t| -4.0 + 6.0 * (1.5 * t).cos()), 0.6, false),
                    band(along(&|t| -4.0 + 3.0 * (0.8 * t).sin()), 1.2, false),
                ],
            ),
        ],
    };
    let files = plot_ephemeris(&dir.join("ephemeris"), &input).unwrap();
    check_files(&files, 1200, 160 + 3 * 340);
    // Both modes' colours (Okabe & Ito blue and vermillion) are drawn.
    let img = image::open(&files.png).unwrap().to_rgb8();
    let has = |c: [u8; 3]| img.pixels().any(|p| p.0 == c);
    assert!(has([0, 114, 178]) && has([213, 94, 0]));
    let mut short = input.clone();
    short.panels[1].modes[0].q95.pop();
    assert!(plot_ephemeris(&dir.join("bad_ephemeris"), &short).is_err());
    let one = EphemerisPlotInput {
        times: vec![2027.0],
        ..input
    };
    assert!(plot_ephemeris(&dir.join("bad_ephemeris"), &one).is_err());
}
