//! The physical range of each prior key and the check that a prior (or a
//! fixed value) has support there.

use crate::prior::Prior;

/// Physical domain of a prior key, in the key's unit.
pub(super) struct Domain {
    lo: f64,
    hi: f64,
    lo_open: bool,
    hi_open: bool,
}

pub(super) const POSITIVE: Domain = Domain {
    lo: 0.0,
    hi: f64::INFINITY,
    lo_open: true,
    hi_open: false,
};
pub(super) const NON_NEGATIVE: Domain = Domain {
    lo: 0.0,
    hi: f64::INFINITY,
    lo_open: false,
    hi_open: false,
};
pub(super) const ANY: Domain = Domain {
    lo: f64::NEG_INFINITY,
    hi: f64::INFINITY,
    lo_open: false,
    hi_open: false,
};
pub(super) const ECCENTRICITY: Domain = Domain {
    lo: 0.0,
    hi: 1.0,
    lo_open: false,
    hi_open: true,
};
pub(super) const INCLINATION_DEG: Domain = Domain {
    lo: 0.0,
    hi: 180.0,
    lo_open: false,
    hi_open: false,
};

impl Domain {
    pub(super) fn contains(&self, v: f64) -> bool {
        let lo_ok = if self.lo_open {
            v > self.lo
        } else {
            v >= self.lo
        };
        let hi_ok = if self.hi_open {
            v < self.hi
        } else {
            v <= self.hi
        };
        lo_ok && hi_ok
    }

    pub(super) fn describe(&self) -> String {
        format!(
            "{}{}, {}{}",
            if self.lo_open { "(" } else { "[" },
            self.lo,
            self.hi,
            if self.hi_open || self.hi.is_infinite() {
                ")"
            } else {
                "]"
            }
        )
    }

    /// Why `prior` cannot be a prior on this domain, if it cannot.
    pub(super) fn refuse(&self, prior: &Prior) -> Option<String> {
        let (lo, hi) = prior.support();
        if prior.is_fixed() {
            return (!self.contains(lo)).then(|| {
                format!(
                    "fixed value {lo} is outside the allowed range {}",
                    self.describe()
                )
            });
        }
        let overlaps = hi > self.lo
            && if self.hi_open {
                lo < self.hi
            } else {
                lo <= self.hi
            };
        (!overlaps).then(|| {
            format!(
                "the prior {} has no support in the allowed range {}",
                prior.describe(),
                self.describe()
            )
        })
    }
}
