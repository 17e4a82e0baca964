//! Calendar months of Julian Dates, for observing seasons.

use crate::PlanError;

/// Calendar (Gregorian after 1582 October 15, Julian before) year, month
/// (1-12) and day with fraction of a Julian Date, by the algorithm of
/// J. Meeus, Astronomical Algorithms (2nd ed., 1998), chapter 7.
pub fn calendar_date(jd: f64) -> (i64, u32, f64) {
    let z = (jd + 0.5).floor();
    let f = jd + 0.5 - z;
    let a = if z < 2_299_161.0 {
        z
    } else {
        let alpha = ((z - 1_867_216.25) / 36_524.25).floor();
        z + 1.0 + alpha - (alpha / 4.0).floor()
    };
    let b = a + 1524.0;
    let c = ((b - 122.1) / 365.25).floor();
    let d = (365.25 * c).floor();
    let e = ((b - d) / 30.6001).floor();
    let day = b - d - (30.6001 * e).floor() + f;
    let month = if e < 14.0 { e - 1.0 } else { e - 13.0 };
    let year = if month > 2.0 { c - 4716.0 } else { c - 4715.0 };
    (year as i64, month as u32, day)
}

/// Calendar month (1-12) of a Julian Date.
pub fn calendar_month(jd: f64) -> u32 {
    calendar_date(jd).1
}

/// A range of calendar months, inclusive, that may wrap past December
/// ("10-3" is October to March): an observing season.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MonthRange {
    /// First month, 1-12.
    pub first: u32,
    /// Last month, 1-12.
    pub last: u32,
}

impl MonthRange {
    /// Parses "FIRST-LAST" (months 1-12) or a single month "M".
    pub fn parse(text: &str) -> Result<Self, PlanError> {
        let month = |s: &str| -> Result<u32, PlanError> {
            match s.trim().parse::<u32>() {
                Ok(m) if (1..=12).contains(&m) => Ok(m),
                _ => Err(PlanError::Setting(format!(
                    "observing season '{text}': '{s}' is not a month number 1 to 12 \
                     (write e.g. 4-9 for April to September, 10-3 for October to March)"
                ))),
            }
        };
        match text.split_once('-') {
            Some((a, b)) => Ok(Self {
                first: month(a)?,
                last: month(b)?,
            }),
            None => {
                let m = month(text)?;
                Ok(Self { first: m, last: m })
            }
        }
    }

    /// Whether the range holds `month`.
    pub fn contains(&self, month: u32) -> bool {
        if self.first <= self.last {
            (self.first..=self.last).contains(&month)
        } else {
            month >= self.first || month <= self.last
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn meeus_examples() {
        // J. Meeus, Astronomical Algorithms (2nd ed., 1998), example 7.c:
        // JD 2436116.31 is 1957 October 4.81.
        let (y, m, d) = calendar_date(2_436_116.31);
        assert_eq!((y, m), (1957, 10));
        assert!((d - 4.81).abs() < 1e-6);
        // Ibid., example 7.b read backwards: 333 January 27.5 (Julian
        // calendar) is JD 1842713.0.
        let (y, m, d) = calendar_date(1_842_713.0);
        assert_eq!((y, m), (333, 1));
        assert!((d - 27.5).abs() < 1e-9);
        // J2000.0 = JD 2451545.0 = 2000 January 1.5 (common practice).
        assert_eq!(calendar_date(2_451_545.0), (2000, 1, 1.5));
    }

    #[test]
    fn seasons_wrap_past_december_and_bad_months_are_refused() {
        let winter = MonthRange::parse("10-3").unwrap();
        assert!(winter.contains(12) && winter.contains(1) && winter.contains(3));
        assert!(!winter.contains(4) && !winter.contains(9));
        let summer = MonthRange::parse("4-9").unwrap();
        assert!(summer.contains(4) && summer.contains(9) && !summer.contains(10));
        assert_eq!(
            MonthRange::parse("7").unwrap(),
            MonthRange { first: 7, last: 7 }
        );
        for bad in ["0-3", "13", "a-b", "", "4-"] {
            assert!(MonthRange::parse(bad).is_err(), "{bad}");
        }
    }
}
