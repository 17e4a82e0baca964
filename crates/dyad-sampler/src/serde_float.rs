//! Reading back floating-point fields that JSON could not hold: serde_json
//! writes NaN and the infinities as `null` (JSON has no such numbers, RFC
//! 8259 sec. 6), so a record written by dyad reads `null` back as NaN.
//! Self-describing binary formats (the CBOR checkpoints) keep the value.

use serde::{Deserialize, Deserializer};

/// A number, or NaN for `null`.
pub(crate) fn nan_if_null<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
    Ok(Option::<f64>::deserialize(d)?.unwrap_or(f64::NAN))
}

/// A number, or +infinity for `null`: for a field whose only non-finite
/// value is "unknown, so infinitely uncertain" (a watched quantity's
/// standard error, autocorrelation time, drift statistic or R-hat).
pub(crate) fn infinity_if_null<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
    Ok(Option::<f64>::deserialize(d)?.unwrap_or(f64::INFINITY))
}

/// Numbers, each NaN where it is `null`.
pub(crate) fn nans_if_null<'de, D: Deserializer<'de>>(d: D) -> Result<Vec<f64>, D::Error> {
    Ok(Vec::<Option<f64>>::deserialize(d)?
        .into_iter()
        .map(|v| v.unwrap_or(f64::NAN))
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Deserialize, serde::Serialize)]
    struct Record {
        #[serde(deserialize_with = "nan_if_null")]
        one: f64,
        #[serde(deserialize_with = "nans_if_null")]
        many: Vec<f64>,
    }

    #[test]
    fn null_reads_back_as_nan_and_numbers_as_they_are() {
        let text = serde_json::to_string(&Record {
            one: f64::NAN,
            many: vec![1.5, f64::INFINITY, -0.25],
        })
        .expect("serialisable");
        assert_eq!(text, r#"{"one":null,"many":[1.5,null,-0.25]}"#);
        let back: Record = serde_json::from_str(&text).expect("readable");
        assert!(back.one.is_nan());
        assert_eq!(back.many[0], 1.5);
        assert!(back.many[1].is_nan());
        assert_eq!(back.many[2], -0.25);
    }
}
