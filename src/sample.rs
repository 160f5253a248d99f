//! Observed unit lives, validated and merged as they arrive.
//!
//! An observation says where a failure age lies: exactly at an age (a
//! failure), beyond an age (a suspension), before an age (left-censored:
//! found failed at the first inspection), or between two ages
//! (interval-censored), for a unit that may have entered observation at an
//! `entry` age (left truncation), standing for `count` identical units.
//! Identical observations are merged into counts as they arrive, so memory
//! grows with distinct observations, not rows. Knows nothing of families
//! or SQL.

use crate::error::{show_number, LifeError, LifeResult};
use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

/// A multiply-and-rotate hasher for the sample's keys (three age bit
/// patterns). Hand-written because the standard SipHash costs about a
/// quarter of `life_fit`'s per-row time (measured with the benchmark in
/// tests/bench); the keys are ages, not attacker-chosen strings, and a bad
/// spread only slows a fit, never changes it.
#[derive(Default, Clone, Copy)]
pub struct AgeHasher(u64);

impl Hasher for AgeHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for chunk in bytes.chunks(8) {
            let mut buf = [0u8; 8];
            buf[..chunk.len()].copy_from_slice(chunk);
            self.write_u64(u64::from_le_bytes(buf));
        }
    }
    fn write_u64(&mut self, x: u64) {
        self.0 = (self.0.rotate_left(23) ^ x)
            .wrapping_mul(0x9E37_79B9_7F4A_7C15)
            .rotate_left(17);
    }
    fn write_usize(&mut self, x: usize) {
        self.write_u64(x as u64);
    }
}

/// Most units a sample holds.
pub const MAX_UNITS: u64 = 1_000_000_000_000_000_000;

type AgeMap = HashMap<[u64; 3], u64, BuildHasherDefault<AgeHasher>>;
/// Failures and suspensions observed from new, keyed by the age's bits:
/// [failures, suspensions]. Most fleet rows are of this kind; an 8-byte key
/// halves `life_fit`'s per-row map cost against the general map (measured).
type PlainMap = HashMap<u64, [u64; 2], BuildHasherDefault<AgeHasher>>;

/// What is known about one (group of) unit life.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Obs {
    /// Earliest age at which the failure can have happened (the age itself
    /// for a failure or a suspension; 0 for a left-censored life).
    pub earliest: f64,
    /// Latest age at which the failure can have happened; infinite for a
    /// suspension, equal to `earliest` for an observed failure.
    pub latest: f64,
    /// Age at which the unit entered observation (0: from new).
    pub entry: f64,
    /// Number of identical units this observation stands for.
    pub count: f64,
}

/// The kinds of observation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Failure observed at an age.
    Failure,
    /// Unit running (or removed unfailed) at an age.
    Suspension,
    /// Failed at some age before the given one (from new).
    LeftCensored,
    /// Failed between two ages.
    Interval,
}

impl Obs {
    /// Which kind of observation this is.
    pub fn kind(&self) -> Kind {
        if self.latest == f64::INFINITY {
            Kind::Suspension
        } else if self.latest == self.earliest {
            Kind::Failure
        } else if self.earliest == 0.0 {
            Kind::LeftCensored
        } else {
            Kind::Interval
        }
    }

    /// True for observations that contain a failure (all but suspensions).
    pub fn failed(&self) -> bool {
        self.latest != f64::INFINITY
    }
}

/// Merged life data of any censoring kind.
#[derive(Debug, Clone, Default)]
pub struct Sample {
    /// Keyed by the bit patterns of (earliest, latest, entry), with -0
    /// folded into +0 and a suspension's latest stored as +infinity.
    groups: AgeMap,
    /// Exact failures and suspensions with entry age 0 (the common case).
    plain: PlainMap,
    /// Units per kind: failures, suspensions, left-censored, interval.
    per_kind: [u64; 4],
    /// Units with an entry age above 0.
    truncated: u64,
}

/// Checks an age: finite and not negative.
pub fn check_age(age: f64) -> LifeResult<f64> {
    check_named("age", age)
}

fn check_named(arg: &'static str, age: f64) -> LifeResult<f64> {
    if age.is_finite() && age >= 0.0 {
        Ok(age + 0.0) // folds -0.0 into +0.0
    } else {
        Err(LifeError::bad(
            arg,
            "must be a finite number >= 0",
            show_number(age),
        ))
    }
}

fn kind_index(k: Kind) -> usize {
    match k {
        Kind::Failure => 0,
        Kind::Suspension => 1,
        Kind::LeftCensored => 2,
        Kind::Interval => 3,
    }
}

impl Sample {
    /// An empty sample.
    pub fn new() -> Self {
        Self::default()
    }

    /// Validates and builds an observation. `latest` None is a suspension.
    pub fn observation(
        earliest: f64,
        latest: Option<f64>,
        entry: f64,
        count: u64,
    ) -> LifeResult<Obs> {
        let earliest = check_named("earliest", earliest)?;
        let entry = check_named("entry", entry)?;
        let latest = match latest {
            None => f64::INFINITY,
            Some(l) => {
                let l = check_named("latest", l)?;
                if l < earliest {
                    return Err(LifeError::BadArgument {
                        arg: "latest",
                        expected: "must not be below earliest",
                        got: format!("{} with earliest {}", show_number(l), show_number(earliest)),
                    });
                }
                if l == 0.0 {
                    return Err(LifeError::bad(
                        "latest",
                        "must be > 0 (a failure at age 0 carries no life)",
                        "0",
                    ));
                }
                l
            }
        };
        if entry > earliest {
            return Err(LifeError::BadArgument {
                arg: "entry",
                expected: "must not exceed the age at which the life is observed",
                got: format!(
                    "{} with earliest {}",
                    show_number(entry),
                    show_number(earliest)
                ),
            });
        }
        if count == 0 {
            return Err(LifeError::bad("count", "must be a whole number >= 1", "0"));
        }
        Ok(Obs {
            earliest,
            latest,
            entry,
            count: count as f64,
        })
    }

    fn key(o: &Obs) -> [u64; 3] {
        [o.earliest.to_bits(), o.latest.to_bits(), o.entry.to_bits()]
    }

    /// Adds `count` units described by an observation built with [`Sample::observation`].
    /// Refuses to hold more than [`MAX_UNITS`] units in all (the counts are
    /// summed in 64 bits).
    pub fn push(&mut self, o: Obs) -> LifeResult<()> {
        let c = o.count as u64;
        if self
            .len()
            .checked_add(c)
            .is_none_or(|total| total > MAX_UNITS)
        {
            return Err(LifeError::bad(
                "count",
                "must keep the total below 1e18 units",
                format!("{c} on top of {}", self.len()),
            ));
        }
        let kind = o.kind();
        if o.entry == 0.0 && matches!(kind, Kind::Failure | Kind::Suspension) {
            let slot = usize::from(kind == Kind::Suspension);
            self.plain.entry(o.earliest.to_bits()).or_insert([0, 0])[slot] += c;
        } else {
            *self.groups.entry(Self::key(&o)).or_insert(0) += c;
        }
        self.per_kind[kind_index(kind)] += c;
        if o.entry > 0.0 {
            self.truncated += c;
        }
        Ok(())
    }

    /// Removes units previously added (window frames sliding on). Removing
    /// units that are not present is an error, not a silent no-op.
    pub fn pull(&mut self, o: Obs) -> LifeResult<()> {
        let c = o.count as u64;
        let kind = o.kind();
        let missing = || {
            LifeError::bad(
                "age",
                "must be present in the window to leave it",
                show_number(o.earliest),
            )
        };
        if o.entry == 0.0 && matches!(kind, Kind::Failure | Kind::Suspension) {
            let slot = usize::from(kind == Kind::Suspension);
            let key = o.earliest.to_bits();
            let have = self.plain.get_mut(&key).ok_or_else(missing)?;
            if have[slot] < c {
                return Err(missing());
            }
            have[slot] -= c;
            if have[0] == 0 && have[1] == 0 {
                self.plain.remove(&key);
            }
        } else {
            let key = Self::key(&o);
            match self.groups.get_mut(&key) {
                Some(have) if *have >= c => {
                    *have -= c;
                    if *have == 0 {
                        self.groups.remove(&key);
                    }
                }
                _ => return Err(missing()),
            }
        }
        self.per_kind[kind_index(kind)] -= c;
        if o.entry > 0.0 {
            self.truncated -= c;
        }
        Ok(())
    }

    /// Adds one unit life: a failure or a suspension at `age`.
    pub fn add(&mut self, age: f64, failed: bool) -> LifeResult<()> {
        let age = check_age(age)?;
        self.push(Obs {
            earliest: age,
            latest: if failed { age } else { f64::INFINITY },
            entry: 0.0,
            count: 1.0,
        })
    }

    /// Removes one unit life added with [`Sample::add`].
    pub fn remove(&mut self, age: f64, failed: bool) -> LifeResult<()> {
        let age = check_age(age)?;
        self.pull(Obs {
            earliest: age,
            latest: if failed { age } else { f64::INFINITY },
            entry: 0.0,
            count: 1.0,
        })
    }

    /// Number of exactly observed failures.
    pub fn failures(&self) -> u64 {
        self.per_kind[0]
    }

    /// Number of suspensions.
    pub fn suspensions(&self) -> u64 {
        self.per_kind[1]
    }

    /// Number of left-censored lives.
    pub fn left_censored(&self) -> u64 {
        self.per_kind[2]
    }

    /// Number of interval-censored lives.
    pub fn interval_censored(&self) -> u64 {
        self.per_kind[3]
    }

    /// Number of lives that contain a failure, exact or censored.
    pub fn failed_lives(&self) -> u64 {
        self.per_kind[0] + self.per_kind[2] + self.per_kind[3]
    }

    /// Number of units that entered observation late.
    pub fn truncated(&self) -> u64 {
        self.truncated
    }

    /// Number of unit lives.
    pub fn len(&self) -> u64 {
        self.per_kind.iter().sum()
    }

    /// True when no lives have been added.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Number of distinct observations.
    pub fn distinct(&self) -> usize {
        self.groups.len()
            + self
                .plain
                .values()
                .map(|v| usize::from(v[0] > 0) + usize::from(v[1] > 0))
                .sum::<usize>()
    }

    /// True when every life is an exact failure or a suspension observed from new.
    pub fn is_right_censored_only(&self) -> bool {
        self.per_kind[2] == 0 && self.per_kind[3] == 0 && self.truncated == 0
    }

    /// The merged observations sorted by (earliest, latest, entry), so that
    /// every sum over them runs in the same order however the rows arrived
    /// (results are deterministic to the last bit, as SQL requires).
    pub fn obs(&self) -> Vec<Obs> {
        let mut out: Vec<Obs> = self
            .groups
            .iter()
            .map(|(k, &c)| Obs {
                earliest: f64::from_bits(k[0]),
                latest: f64::from_bits(k[1]),
                entry: f64::from_bits(k[2]),
                count: c as f64,
            })
            .chain(self.plain.iter().flat_map(|(&bits, &[f, s])| {
                let age = f64::from_bits(bits);
                [
                    (f > 0).then_some(Obs {
                        earliest: age,
                        latest: age,
                        entry: 0.0,
                        count: f as f64,
                    }),
                    (s > 0).then_some(Obs {
                        earliest: age,
                        latest: f64::INFINITY,
                        entry: 0.0,
                        count: s as f64,
                    }),
                ]
                .into_iter()
                .flatten()
            }))
            .collect();
        out.sort_by(|a, b| {
            a.earliest
                .total_cmp(&b.earliest)
                .then(a.latest.total_cmp(&b.latest))
                .then(a.entry.total_cmp(&b.entry))
        });
        out
    }

    /// Right-censored data merged by age (failures and suspensions per
    /// distinct age), sorted by age; valid when [`Sample::is_right_censored_only`].
    pub fn groups(&self) -> Vec<AgeGroup> {
        Self::groups_of(&self.obs())
    }

    /// [`Sample::groups`] from observations already sorted by [`Sample::obs`].
    pub fn groups_of(obs: &[Obs]) -> Vec<AgeGroup> {
        let mut out: Vec<AgeGroup> = Vec::with_capacity(obs.len());
        for &o in obs {
            let (f, s) = if o.failed() {
                (o.count, 0.0)
            } else {
                (0.0, o.count)
            };
            match out.last_mut() {
                Some(g) if g.age == o.earliest => {
                    g.failures += f;
                    g.suspensions += s;
                }
                _ => out.push(AgeGroup {
                    age: o.earliest,
                    failures: f,
                    suspensions: s,
                }),
            }
        }
        out
    }

    /// Builds a sample from (age, failed, count) rows, e.g. grouped data.
    pub fn from_rows(rows: &[(f64, bool, u64)]) -> LifeResult<Self> {
        let mut s = Sample::new();
        for &(age, failed, count) in rows {
            if count == 0 {
                continue;
            }
            s.push(Self::observation(age, failed.then_some(age), 0.0, count)?)?;
        }
        Ok(s)
    }
}

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
        assert_eq!(s.distinct(), 3);
        assert_eq!((s.failures(), s.suspensions()), (3, 3));
        s.remove(10.0, true).unwrap();
        assert!(s.remove(11.0, true).is_err());
        assert!(s.remove(0.0, true).is_err());
        let g = s.groups();
        assert_eq!(g.len(), 2);
        assert_eq!(g[0].age, 0.0);
        assert_eq!(g[0].suspensions, 2.0);
        assert_eq!(g[1].failures, 2.0);
        assert_eq!(g[1].suspensions, 1.0);
    }

    #[test]
    fn kinds_and_validation() {
        let o = |e, l, n, c| Sample::observation(e, l, n, c);
        assert_eq!(o(5.0, Some(5.0), 0.0, 1).unwrap().kind(), Kind::Failure);
        assert_eq!(o(5.0, None, 2.0, 1).unwrap().kind(), Kind::Suspension);
        assert_eq!(
            o(0.0, Some(5.0), 0.0, 1).unwrap().kind(),
            Kind::LeftCensored
        );
        assert_eq!(o(3.0, Some(5.0), 0.0, 12).unwrap().kind(), Kind::Interval);
        assert!(o(5.0, Some(3.0), 0.0, 1).is_err());
        assert!(o(5.0, None, 6.0, 1).is_err());
        assert!(o(0.0, Some(0.0), 0.0, 1).is_err());
        assert!(o(1.0, None, 0.0, 0).is_err());
        assert!(o(f64::NAN, None, 0.0, 1).is_err());
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
