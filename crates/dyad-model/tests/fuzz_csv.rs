//! Robustness of the CSV loaders: random bytes and random mutations of valid
//! files must give `Ok` or `Err`, never a panic; whatever loads must satisfy
//! the documented invariants (finite values, positive errors, correlations in
//! (-1, 1), position angles in [0, 2 pi), epochs in the plausible range).
//! Seeded (fixed proptest seed) so that every run checks the same inputs.

use std::path::Path;

use dyad_model::data::{AstrometryEpoch, RelativePosition, VelocityPoint};
use dyad_model::load::{
    load_astrometry_from_reader, load_velocities_from_reader, EARLIEST_PLAUSIBLE_JD,
    LATEST_PLAUSIBLE_JD,
};
use proptest::prelude::*;
use proptest::test_runner::{Config, RngSeed};

const POLAR_FILE: &str = "# invented pair\n\
jd, sep_mas, sep_err_mas, pa_deg, pa_err_deg, corr, source\n\
2455000.5, 250.5, 3, 120.25, 0.8, 0.1, \"speckle, 4 m\"\n\
2455100.5, 240.0, 2.5, 123.5, 0.7, -0.2, lucky imaging\n";

const CARTESIAN_FILE: &str = "mjd,dra_mas,ddec_mas,dra_err_mas,ddec_err_mas\n\
55000.0,-12.5,30,0.5,0.75\n\
55010.0,-11.0,31,0.5,0.75\n";

const VELOCITY_FILE: &str = "jyear, rv_ms, rv_err_ms, star, instrument\n\
2010.25, 1250, 30, primary, echelle\n\
2010.5, -2400, 45, secondary, \"fibre, red\"\n";

fn config() -> Config {
    Config {
        cases: 512,
        failure_persistence: None,
        rng_seed: RngSeed::Fixed(20_261_201),
        ..Config::default()
    }
}

fn check_astrometry(epochs: &[AstrometryEpoch]) {
    for epoch in epochs {
        assert!((EARLIEST_PLAUSIBLE_JD..=LATEST_PLAUSIBLE_JD).contains(&epoch.t_jd));
        match epoch.position {
            RelativePosition::Polar {
                sep_mas,
                sep_err_mas,
                pa_rad,
                pa_err_rad,
                corr,
            } => {
                assert!(sep_mas.is_finite() && sep_mas >= 0.0);
                assert!(sep_err_mas.is_finite() && sep_err_mas > 0.0);
                assert!((0.0..2.0 * std::f64::consts::PI).contains(&pa_rad));
                assert!(pa_err_rad.is_finite() && pa_err_rad > 0.0);
                assert!(corr > -1.0 && corr < 1.0);
            }
            RelativePosition::Cartesian {
                dra_mas,
                ddec_mas,
                dra_err_mas,
                ddec_err_mas,
                corr,
            } => {
                assert!(dra_mas.is_finite() && ddec_mas.is_finite());
                assert!(dra_err_mas.is_finite() && dra_err_mas > 0.0);
                assert!(ddec_err_mas.is_finite() && ddec_err_mas > 0.0);
                assert!(corr > -1.0 && corr < 1.0);
            }
        }
    }
}

fn check_velocities(points: &[VelocityPoint], instruments: &[String]) {
    for point in points {
        assert!((EARLIEST_PLAUSIBLE_JD..=LATEST_PLAUSIBLE_JD).contains(&point.t_jd));
        assert!(point.rv_kms.is_finite());
        assert!(point.rv_err_kms.is_finite() && point.rv_err_kms > 0.0);
        assert!(point.instrument < instruments.len());
    }
    assert!(instruments.iter().all(|name| !name.is_empty()));
}

/// Feeds bytes to both loaders; panics only through the invariant checks.
fn feed(bytes: &[u8]) {
    let file = Path::new("fuzz.csv");
    if let Ok(epochs) = load_astrometry_from_reader(bytes, file) {
        check_astrometry(&epochs);
    }
    let mut instruments = Vec::new();
    match load_velocities_from_reader(bytes, file, &mut instruments) {
        Ok(points) => check_velocities(&points, &instruments),
        Err(error) => {
            assert!(instruments.is_empty());
            assert!(error.to_string().starts_with("fuzz.csv"), "{error}");
        }
    }
}

/// One edit of a byte buffer.
#[derive(Debug, Clone)]
enum Edit {
    Insert(usize, u8),
    Delete(usize, usize),
    Replace(usize, u8),
    DuplicateLine(usize),
    InsertText(usize, &'static str),
}

fn edit_strategy() -> impl Strategy<Value = Edit> {
    // Bytes that matter to the format are weighted up.
    let interesting = prop_oneof![
        Just(b','),
        Just(b'\n'),
        Just(b'"'),
        Just(b'#'),
        Just(b'-'),
        Just(b'.'),
        Just(b'e'),
        Just(b' '),
        Just(b'\r'),
        Just(0xff_u8),
        Just(0xc3_u8),
        any::<u8>(),
    ];
    let text = prop_oneof![
        Just("NaN"),
        Just("inf"),
        Just("-0"),
        Just("1e308"),
        Just("-1e309"),
        Just("360"),
        Just("1.0"),
        Just("sep_deg"),
        Just("mjd"),
        Just(",,,"),
        Just("\u{feff}"),
        Just("é"),
        Just("99999999999999999999999"),
    ];
    prop_oneof![
        (any::<usize>(), interesting.clone()).prop_map(|(at, b)| Edit::Insert(at, b)),
        (any::<usize>(), 1usize..8).prop_map(|(at, n)| Edit::Delete(at, n)),
        (any::<usize>(), interesting).prop_map(|(at, b)| Edit::Replace(at, b)),
        any::<usize>().prop_map(Edit::DuplicateLine),
        (any::<usize>(), text).prop_map(|(at, t)| Edit::InsertText(at, t)),
    ]
}

fn apply(base: &str, edits: &[Edit]) -> Vec<u8> {
    let mut bytes = base.as_bytes().to_vec();
    for edit in edits {
        let len = bytes.len();
        match *edit {
            Edit::Insert(at, b) => bytes.insert(at % (len + 1), b),
            Edit::Delete(at, n) if len > 0 => {
                let start = at % len;
                let end = (start + n).min(len);
                bytes.drain(start..end);
            }
            Edit::Delete(..) => {}
            Edit::Replace(at, b) if len > 0 => bytes[at % len] = b,
            Edit::Replace(..) => {}
            Edit::DuplicateLine(k) => {
                let lines: Vec<Vec<u8>> =
                    bytes.split(|&b| b == b'\n').map(<[u8]>::to_vec).collect();
                let copy = lines[k % lines.len()].clone();
                let mut out = Vec::with_capacity(len + copy.len() + 1);
                for (i, line) in lines.iter().enumerate() {
                    if i > 0 {
                        out.push(b'\n');
                    }
                    out.extend_from_slice(line);
                    if i == k % lines.len() {
                        out.push(b'\n');
                        out.extend_from_slice(&copy);
                    }
                }
                bytes = out;
            }
            Edit::InsertText(at, text) => {
                let at = at % (len + 1);
                bytes.splice(at..at, text.bytes());
            }
        }
    }
    bytes
}

#[test]
fn unmutated_files_load() {
    // The bases of the mutations are valid, so the mutations start from files that load.
    let file = Path::new("base.csv");
    assert_eq!(
        load_astrometry_from_reader(POLAR_FILE.as_bytes(), file)
            .unwrap()
            .len(),
        2
    );
    assert_eq!(
        load_astrometry_from_reader(CARTESIAN_FILE.as_bytes(), file)
            .unwrap()
            .len(),
        2
    );
    let mut instruments = Vec::new();
    assert_eq!(
        load_velocities_from_reader(VELOCITY_FILE.as_bytes(), file, &mut instruments)
            .unwrap()
            .len(),
        2
    );
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn random_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        feed(&bytes);
    }

    #[test]
    fn random_text_never_panics(text in "[ -~\\n\"#,]{0,300}") {
        feed(text.as_bytes());
    }

    #[test]
    fn mutated_files_never_panic(
        base in prop_oneof![Just(POLAR_FILE), Just(CARTESIAN_FILE), Just(VELOCITY_FILE)],
        edits in proptest::collection::vec(edit_strategy(), 1..6),
    ) {
        feed(&apply(base, &edits));
    }
}
