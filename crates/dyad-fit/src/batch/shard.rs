//! Which systems of a manifest a shard runs.
//!
//! Shard `i` of `n` (1-based, as `--shard I/N` writes it) runs the systems
//! at positions `i - 1`, `i - 1 + n`, `i - 1 + 2n`, ... of the manifest: a
//! fixed deal that spreads neighbouring (often similar) systems over the
//! shards, so that every shard has a similar share of the work, and that
//! depends on nothing but the manifest and `n`.

use std::fmt;

use crate::error::{bail, Result};

/// One of `count` disjoint parts of a batch.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// 0-based number of the shard.
    pub index: usize,
    /// How many shards there are.
    pub count: usize,
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index + 1, self.count)
    }
}

impl Shard {
    /// The whole batch as one shard.
    pub const ALL: Shard = Shard { index: 0, count: 1 };

    /// Parses `I/N` (1 <= I <= N).
    pub fn parse(text: &str) -> Result<Self> {
        let parsed = text.split_once('/').and_then(|(i, n)| {
            Some((
                i.trim().parse::<usize>().ok()?,
                n.trim().parse::<usize>().ok()?,
            ))
        });
        match parsed {
            Some((i, n)) if n >= 1 && (1..=n).contains(&i) => Ok(Self {
                index: i - 1,
                count: n,
            }),
            _ => bail!(
                "--shard {text:?}: expected I/N with 1 <= I <= N, e.g. 2/4 for the second of four shards"
            ),
        }
    }

    /// The shard of a Slurm array task, from the variables Slurm sets:
    /// `SLURM_ARRAY_TASK_ID`, `SLURM_ARRAY_TASK_COUNT`,
    /// `SLURM_ARRAY_TASK_MIN` (the first id; arrays may start at 0 or 1)
    /// and `SLURM_ARRAY_TASK_STEP` (`--array=0-10:2`). `None` outside an
    /// array job. `var` looks a variable up (`std::env::var` in the binary).
    pub fn from_slurm(var: impl Fn(&str) -> Option<String>) -> Result<Option<Self>> {
        let Some(id) = var("SLURM_ARRAY_TASK_ID") else {
            return Ok(None);
        };
        let number = |name: &str, default: Option<usize>| -> Result<usize> {
            match var(name) {
                Some(text) => match text.trim().parse::<usize>() {
                    Ok(n) => Ok(n),
                    Err(_) => bail!("{name}={text:?} is not a whole number"),
                },
                None => match default {
                    Some(d) => Ok(d),
                    None => bail!("SLURM_ARRAY_TASK_ID is set but {name} is not: give --shard I/N"),
                },
            }
        };
        let id = match id.trim().parse::<usize>() {
            Ok(n) => n,
            Err(_) => bail!("SLURM_ARRAY_TASK_ID={id:?} is not a whole number"),
        };
        let count = number("SLURM_ARRAY_TASK_COUNT", None)?;
        let min = number("SLURM_ARRAY_TASK_MIN", Some(0))?;
        let step = number("SLURM_ARRAY_TASK_STEP", Some(1))?.max(1);
        let offset = id.checked_sub(min).filter(|o| o % step == 0);
        match offset.map(|o| o / step) {
            Some(index) if index < count => Ok(Some(Self { index, count })),
            _ => bail!(
                "array task {id} does not fit the array (first id {min}, step {step}, {count} tasks): \
                 give the array as --array=0-{} or --array=1-{count}, or pass --shard I/N",
                count.saturating_sub(1)
            ),
        }
    }

    /// Whether the system at 0-based manifest position `position` is this
    /// shard's.
    pub fn holds(&self, position: usize) -> bool {
        position % self.count == self.index
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::HashMap;

    fn slurm(pairs: &[(&str, &str)]) -> Result<Option<Shard>> {
        let vars: HashMap<String, String> = pairs
            .iter()
            .map(|(k, v)| ((*k).to_owned(), (*v).to_owned()))
            .collect();
        Shard::from_slurm(|name| vars.get(name).cloned())
    }

    #[test]
    fn parses_and_deals_systems_disjointly() {
        assert_eq!(Shard::parse("2/4").unwrap(), Shard { index: 1, count: 4 });
        assert_eq!(Shard::parse("1/1").unwrap(), Shard::ALL);
        for bad in ["0/4", "5/4", "1/0", "2", "a/b", ""] {
            assert!(Shard::parse(bad).is_err(), "{bad}");
        }
        // Every position belongs to exactly one of the n shards.
        for n in 1..6 {
            for position in 0..40 {
                let owners = (0..n)
                    .filter(|&i| Shard { index: i, count: n }.holds(position))
                    .count();
                assert_eq!(owners, 1);
            }
        }
    }

    #[test]
    fn shard_from_slurm_array_variables() {
        assert_eq!(slurm(&[]).unwrap(), None);
        let zero_based = [
            ("SLURM_ARRAY_TASK_ID", "3"),
            ("SLURM_ARRAY_TASK_COUNT", "4"),
            ("SLURM_ARRAY_TASK_MIN", "0"),
        ];
        assert_eq!(
            slurm(&zero_based).unwrap(),
            Some(Shard { index: 3, count: 4 })
        );
        let one_based = [
            ("SLURM_ARRAY_TASK_ID", "1"),
            ("SLURM_ARRAY_TASK_COUNT", "4"),
            ("SLURM_ARRAY_TASK_MIN", "1"),
        ];
        assert_eq!(
            slurm(&one_based).unwrap(),
            Some(Shard { index: 0, count: 4 })
        );
        let stepped = [
            ("SLURM_ARRAY_TASK_ID", "4"),
            ("SLURM_ARRAY_TASK_COUNT", "3"),
            ("SLURM_ARRAY_TASK_MIN", "0"),
            ("SLURM_ARRAY_TASK_STEP", "2"),
        ];
        assert_eq!(slurm(&stepped).unwrap(), Some(Shard { index: 2, count: 3 }));
        assert!(slurm(&[("SLURM_ARRAY_TASK_ID", "1")]).is_err());
        assert!(slurm(&[
            ("SLURM_ARRAY_TASK_ID", "9"),
            ("SLURM_ARRAY_TASK_COUNT", "4")
        ])
        .is_err());
    }
}
