//! The elements as a LaTeX table for a paper (`elements.tex`), with the
//! trade's symbols and the periastron time also as a Besselian epoch.

use dyad_orbit::TimeScale;
use dyad_report::{ElementRow, ParameterKind, PosteriorDraws};

/// (parameter name, LaTeX symbol, LaTeX unit), in the order a paper lists
/// them; rows whose parameter the model lacks are left out.
const ROWS: [(&str, &str, &str); 17] = [
    ("period_years", "P", "yr"),
    ("period_days", "P", "d"),
    ("periastron_time_jd", "T", "JD"),
    ("periastron_time_byear", "T", "Besselian yr"),
    ("eccentricity", "e", ""),
    ("semi_major_axis_arcsec", "a", "arcsec"),
    ("semi_major_axis_au", "a", "au"),
    ("inclination_deg", "i", "deg"),
    ("node_deg", "\\Omega", "deg"),
    ("omega_secondary_deg", "\\omega_2", "deg"),
    ("k1_kms", "K_1", "km\\,s$^{-1}$"),
    ("k2_kms", "K_2", "km\\,s$^{-1}$"),
    ("gamma", "\\gamma", "km\\,s$^{-1}$"),
    ("mass_primary_msun", "M_1", "$M_\\odot$"),
    ("mass_secondary_msun", "M_2", "$M_\\odot$"),
    ("parallax_mas", "\\varpi", "mas"),
    ("orbital_parallax_mas", "\\varpi_\\mathrm{orb}", "mas"),
];

/// The rows of the elements table from the posterior draws. Quantities
/// that are not columns of the draws are converted from ones that are: a in
/// arcsec from mas, T as a Besselian epoch (Lieske 1979) from JD, gamma as
/// the first instrument's velocity offset.
pub fn element_rows(draws: &PosteriorDraws) -> Vec<ElementRow> {
    let column = |name: &str| draws.index_of(name).map(|i| (i, draws.column(i)));
    let gamma = draws
        .params
        .iter()
        .position(|p| p.name.starts_with("offset_kms["));
    ROWS.iter()
        .filter_map(|&(name, symbol, unit)| {
            let (kind, values) = match name {
                "semi_major_axis_arcsec" => {
                    let (_, v) = column("semi_major_axis_mas")?;
                    (
                        ParameterKind::Linear,
                        v.iter().map(|a| a / 1000.0).collect(),
                    )
                }
                "periastron_time_byear" => {
                    let (_, v) = column("periastron_time_jd")?;
                    let b = TimeScale::BesselianYear;
                    (
                        ParameterKind::Linear,
                        v.iter().map(|&t| b.from_jd(t)).collect(),
                    )
                }
                "gamma" => (ParameterKind::Linear, draws.column(gamma?)),
                _ => {
                    let (i, v) = column(name)?;
                    (draws.params[i].kind, v)
                }
            };
            Some(ElementRow {
                symbol: symbol.to_owned(),
                unit: unit.to_owned(),
                kind,
                values,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use dyad_report::ParameterInfo;

    #[test]
    fn periastron_time_becomes_a_besselian_epoch() {
        // B1950.0 = JD 2433282.4235 (Lieske 1979, A&A 73, 282; Explanatory
        // Supplement to the Astronomical Almanac, 1992, sect. 3.252).
        let draws = PosteriorDraws::new(
            vec![
                ParameterInfo::linear("periastron_time_jd", "d", "T"),
                ParameterInfo::linear("semi_major_axis_mas", "mas", "a"),
            ],
            vec![2433282.4235, 907.0, 2433282.4235, 907.0],
            vec![0.0, 0.0],
        )
        .unwrap();
        let rows = element_rows(&draws);
        let symbols: Vec<(&str, &str)> = rows
            .iter()
            .map(|r| (r.symbol.as_str(), r.unit.as_str()))
            .collect();
        assert_eq!(
            symbols,
            [("T", "JD"), ("T", "Besselian yr"), ("a", "arcsec")]
        );
        assert!(
            (rows[1].values[0] - 1950.0).abs() < 1e-6,
            "{}",
            rows[1].values[0]
        );
        assert!((rows[2].values[0] - 0.907).abs() < 1e-12);
    }
}
