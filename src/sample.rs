//! Observed unit lives, validated and merged by age as they arrive.
//!
//! A fleet has many units with the same recorded age (whole days, whole
//! kilometres), so rows are merged into weights as they arrive: memory grows
//! with distinct ages, not rows. Knows nothing of families or SQL.

use crate::error::{show_number, LifeError, LifeResult};
use std::collections::HashMap;

/// One distinct age with how many units failed and were suspended at it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AgeGroup {
    /// Age (usage) at failure or at suspension.
    pub age: f64,
    /// Number of failures at this age.
    pub failures: f64,
    /// Number of suspensions (units removed unfailed or still running) at this age.
    pub suspensions: f64,
}

/// Right-censored life data, merged by age.
#[derive(Debug, Clone, Default)]
pub struct Sample {
    /// Keyed by the bit pattern of the age (with -0 folded into +0):
    /// [failures, suspensions].
    groups: HashMap<u64, [u64; 2]>,
    failures: u64,
    suspensions: u64,
}

/// Checks an age: finite and not negative.
pub fn check_age(age: f64) -> LifeResult<f64> {
    if age.is_finite() && age >= 0.0 {
        Ok(age + 0.0) // folds -0.0 into +0.0
    } else {
        Err(LifeError::bad(
            "age",
            "must be a finite number >= 0",
            show_number(age),
        ))
    }
}

impl Sample {
    /// An empty sample.
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds one unit life: `failed` true for a failure, false for a suspension.
    pub fn add(&mut self, age: f64, failed: bool) -> LifeResult<()> {
        let age = check_age(age)?;
        let entry = self.groups.entry(age.to_bits()).or_insert([0, 0]);
        if failed {
            entry[0] += 1;
            self.failures += 1;
        } else {
            entry[1] += 1;
            self.suspensions += 1;
        }
        Ok(())
    }

    /// Removes one unit life previously added (window frames sliding on).
    /// Removing a life that is not present is an error, not a silent no-op.
    pub fn remove(&mut self, age: f64, failed: bool) -> LifeResult<()> {
        let age = check_age(age)?;
        let key = age.to_bits();
        let slot = usize::from(!failed);
        let Some(entry) = self.groups.get_mut(&key) else {
            return Err(LifeError::bad(
                "age",
                "must be present in the window to leave it",
                show_number(age),
            ));
        };
        if entry[slot] == 0 {
            return Err(LifeError::bad(
                "age",
                "must be present in the window to leave it",
                show_number(age),
            ));
        }
        entry[slot] -= 1;
        if failed {
            self.failures -= 1;
        } else {
            self.suspensions -= 1;
        }
        if entry[0] == 0 && entry[1] == 0 {
            self.groups.remove(&key);
        }
        Ok(())
    }

    /// Number of failures.
    pub fn failures(&self) -> u64 {
        self.failures
    }

    /// Number of suspensions.
    pub fn suspensions(&self) -> u64 {
        self.suspensions
    }

    /// Number of unit lives.
    pub fn len(&self) -> u64 {
        self.failures + self.suspensions
    }

    /// True when no lives have been added.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Number of distinct ages.
    pub fn distinct_ages(&self) -> usize {
        self.groups.len()
    }

    /// The merged data sorted by age, so that every sum over it is taken in
    /// the same order however the rows arrived (results are deterministic
    /// to the last bit, as SQL requires of a deterministic function).
    pub fn groups(&self) -> Vec<AgeGroup> {
        let mut out: Vec<AgeGroup> = self
            .groups
            .iter()
            .map(|(&bits, &[f, s])| AgeGroup {
                age: f64::from_bits(bits),
                failures: f as f64,
                suspensions: s as f64,
            })
            .collect();
        out.sort_by(|a, b| a.age.total_cmp(&b.age));
        out
    }

    /// Builds a sample from (age, failed, count) rows, e.g. grouped data.
    pub fn from_rows(rows: &[(f64, bool, u64)]) -> LifeResult<Self> {
        let mut s = Sample::new();
        for &(age, failed, count) in rows {
            let age = check_age(age)?;
            let entry = s.groups.entry(age.to_bits()).or_insert([0, 0]);
            if failed {
                entry[0] += count;
                s.failures += count;
            } else {
                entry[1] += count;
                s.suspensions += count;
            }
        }
        s.groups.retain(|_, v| v[0] + v[1] > 0);
        Ok(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ties_merge_and_leave() {
        let mut s = Sample::new();
        for _ in 0..3 {
            s.add(10.0, true).unwrap();
        }
        s.add(10.0, false).unwrap();
        s.add(-0.0, false).unwrap();
        s.add(0.0, false).unwrap();
        assert_eq!(s.distinct_ages(), 2);
        assert_eq!((s.failures(), s.suspensions()), (3, 3));
        s.remove(10.0, true).unwrap();
        assert!(s.remove(11.0, true).is_err());
        assert!(s.remove(0.0, true).is_err());
        let g = s.groups();
        assert_eq!(g[0].age, 0.0);
        assert_eq!(g[0].suspensions, 2.0);
        assert_eq!(g[1].failures, 2.0);
    }

    #[test]
    fn bad_ages_are_named() {
        let mut s = Sample::new();
        let e = s.add(-3.0, true).unwrap_err();
        assert_eq!(e.to_string(), "age must be a finite number >= 0, got -3");
        assert!(s.add(f64::NAN, true).is_err());
        assert!(s.add(f64::INFINITY, false).is_err());
    }
}
