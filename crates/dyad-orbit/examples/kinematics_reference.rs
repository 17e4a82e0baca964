//! Reference values of the kinematics for the Python package's test
//! (python/tests/test_kinematics.py), computed here by this crate alone,
//! one epoch at a time, independently of the binding's code.
//!
//! `kinematics_reference IN OUT`: IN holds rows of 11 little-endian f64
//! (t_jd, period_days, t_peri_jd, e, a, inclination_deg, omega_deg,
//! node_deg, k1_kms, k2_kms, gamma_kms); OUT gets one row of 4 f64 per
//! input row (dRA*, dDec, v1, v2), written as their bits.

use std::process::ExitCode;

use dyad_orbit::velocity::velocities_from_semi_amplitudes;
use dyad_orbit::{CampbellElements, Orbit};

const IN_WIDTH: usize = 11;

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().collect();
    let [_, input, output] = args.as_slice() else {
        eprintln!("usage: kinematics_reference IN OUT");
        return ExitCode::FAILURE;
    };
    let bytes = match std::fs::read(input) {
        Ok(b) => b,
        Err(e) => {
            eprintln!("{input}: {e}");
            return ExitCode::FAILURE;
        }
    };
    if bytes.len() % (8 * IN_WIDTH) != 0 {
        eprintln!("{input}: not a whole number of rows of {IN_WIDTH} f64");
        return ExitCode::FAILURE;
    }
    let values: Vec<f64> = bytes
        .chunks_exact(8)
        .map(|b| f64::from_le_bytes(b.try_into().expect("chunks of 8")))
        .collect();
    let mut out = Vec::with_capacity(values.len() / IN_WIDTH * 4 * 8);
    for (row, v) in values.chunks_exact(IN_WIDTH).enumerate() {
        let el = CampbellElements {
            period_days: v[1],
            t_peri_jd: v[2],
            e: v[3],
            a: v[4],
            inc_rad: v[5].to_radians(),
            omega_rad: v[6].to_radians(),
            node_rad: v[7].to_radians(),
        };
        let orbit = match Orbit::new(&el) {
            Ok(o) => o,
            Err(e) => {
                eprintln!("row {row}: {e}");
                return ExitCode::FAILURE;
            }
        };
        let state = orbit.state(v[0]);
        let (v1, v2) = velocities_from_semi_amplitudes(v[10], v[8], v[9], state.rv_shape);
        for x in [state.dra, state.ddec, v1, v2] {
            out.extend_from_slice(&x.to_le_bytes());
        }
    }
    if let Err(e) = std::fs::write(output, out) {
        eprintln!("{output}: {e}");
        return ExitCode::FAILURE;
    }
    ExitCode::SUCCESS
}
