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

/// Largest whole-number age counted in the dense table.
const DENSE_MAX: usize = 1 << 22;

/// Failures and suspensions observed from new: [failures, suspensions] per
/// age. Whole-number ages (days, hours, km as fleets record them) are
/// counted in a table indexed by the age itself, the rest in a map keyed by
/// the age's bits. The table is a measured need: it drops `life_fit`'s
/// per-row cost on day-resolution ages (no hashing, one memory access) and
/// comes out already sorted, so a fit needs no sort. It grows only while it
/// stays within eight slots per row seen (128 bytes, about what a map
/// entry costs), so a few huge ages never allocate a huge table; ages
/// beyond it go to the map.
#[derive(Debug, Clone, Default)]
struct PlainCounts {
    dense: Vec<[u64; 2]>,
    /// Distinct ages with a nonzero count in `dense`.
    dense_used: usize,
    /// One past the largest table index ever counted (the sorted listing
    /// scans only up to it).
    top: usize,
    map: PlainMap,
    /// Rows added (bounds the table's growth).
    added: u64,
}

impl PlainCounts {
    /// The table slot of a whole-number age, growing the table when the
    /// growth rule allows it.
    #[inline(always)]
    fn slot(&mut self, age: f64) -> Option<usize> {
        let i = age as usize; // saturating; exact check below
        if i as f64 != age {
            return None;
        }
        if i < self.dense.len() {
            return Some(i);
        }
        if i >= DENSE_MAX {
            return None;
        }
        let want = (i + 1).next_power_of_two().max(64);
        let allowed = (8 * self.added as usize).min(DENSE_MAX);
        if want > allowed {
            return None;
        }
        self.grow(want);
        Some(i)
    }

    #[cold]
    fn grow(&mut self, len: usize) {
        let old = self.dense.len();
        self.dense.resize(len, [0, 0]);
        // Ages counted in the map that the table now covers move into it,
        // so every age has exactly one home.
        let moving: Vec<u64> = self
            .map
            .keys()
            .copied()
            .filter(|&b| {
                let a = f64::from_bits(b);
                let i = a as usize;
                i as f64 == a && i >= old && i < len
            })
            .collect();
        for b in moving {
            if let Some(c) = self.map.remove(&b) {
                let i = f64::from_bits(b) as usize;
                self.dense[i] = c;
                self.dense_used += 1;
                self.top = self.top.max(i + 1);
            }
        }
    }

    #[inline(always)]
    fn add(&mut self, age: f64, which: usize, c: u64) {
        self.added += 1;
        match self.slot(age) {
            Some(i) => {
                let cell = &mut self.dense[i];
                if cell[0] == 0 && cell[1] == 0 {
                    self.dense_used += 1;
                }
                cell[which] += c;
                self.top = self.top.max(i + 1);
            }
            None => self.map.entry(age.to_bits()).or_insert([0, 0])[which] += c,
        }
    }

    /// Removes counts; false when they are not present.
    fn remove(&mut self, age: f64, which: usize, c: u64) -> bool {
        let i = age as usize;
        if i as f64 == age && i < self.dense.len() {
            let cell = &mut self.dense[i];
            if cell[which] < c {
                return false;
            }
            cell[which] -= c;
            if cell[0] == 0 && cell[1] == 0 {
                self.dense_used -= 1;
            }
            return true;
        }
        let key = age.to_bits();
        let Some(have) = self.map.get_mut(&key) else {
            return false;
        };
        if have[which] < c {
            return false;
        }
        have[which] -= c;
        if have[0] == 0 && have[1] == 0 {
            self.map.remove(&key);
        }
        true
    }

    /// Distinct (age, failures or suspensions) observations.
    fn distinct(&self) -> usize {
        let count = |v: &[u64; 2]| usize::from(v[0] > 0) + usize::from(v[1] > 0);
        self.dense.iter().map(count).sum::<usize>() + self.map.values().map(count).sum::<usize>()
    }

    /// Every age with its [failures, suspensions], sorted by age.
    fn sorted(&self) -> Vec<(f64, [u64; 2])> {
        let mut out: Vec<(f64, [u64; 2])> = Vec::with_capacity(self.dense_used + self.map.len());
        out.extend(
            self.dense[..self.top]
                .iter()
                .enumerate()
                .filter(|(_, c)| c[0] > 0 || c[1] > 0)
                .map(|(i, &c)| (i as f64, c)),
        );
        if !self.map.is_empty() {
            let mut rest: Vec<(u64, [u64; 2])> = self.map.iter().map(|(&b, &c)| (b, c)).collect();
            // Ages are >= +0, so their bit patterns sort as the numbers do.
            rest.sort_unstable_by_key(|&(b, _)| b);
            out.extend(rest.into_iter().map(|(b, c)| (f64::from_bits(b), c)));
            out.sort_by(|a, b| a.0.total_cmp(&b.0));
        }
        out
    }
}

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
    plain: PlainCounts,
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
            self.plain.add(o.earliest, slot, c);
        } else {
            *self.groups.entry(Self::key(&o)).or_insert(0) += c;
        }
        self.per_kind[kind_index(kind)] += c;
        if o.entry > 0.0 {
            self.truncated += c;
        }
        Ok(())
    }

    /// Adds one failure or suspension at an age already checked (finite,
    /// >= 0, > 0 for a failure): the per-row path of `life_fit`.
    #[inline]
    pub fn add_unit(&mut self, age: f64, failed: bool) -> LifeResult<()> {
        debug_assert!(age.is_finite() && age >= 0.0 && (age > 0.0 || !failed));
        if self.len() >= MAX_UNITS {
            return Err(LifeError::bad(
                "count",
                "must keep the total below 1e18 units",
                format!("1 on top of {}", self.len()),
            ));
        }
        let which = usize::from(!failed);
        self.plain.add(age + 0.0, which, 1);
        self.per_kind[which] += 1;
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
            if !self.plain.remove(o.earliest, slot, c) {
                return Err(missing());
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
        self.groups.len() + self.plain.distinct()
    }

    /// True when every life is an exact failure or a suspension observed from new.
    pub fn is_right_censored_only(&self) -> bool {
        self.per_kind[2] == 0 && self.per_kind[3] == 0 && self.truncated == 0
    }

    /// The merged observations sorted by (earliest, latest, entry), so that
    /// every sum over them runs in the same order however the rows arrived
    /// (results are deterministic to the last bit, as SQL requires).
    pub fn obs(&self) -> Vec<Obs> {
        let plain = self.plain.sorted();
        let mut out: Vec<Obs> = Vec::with_capacity(self.groups.len() + 2 * plain.len());
        out.extend(self.groups.iter().map(|(k, &c)| Obs {
            earliest: f64::from_bits(k[0]),
            latest: f64::from_bits(k[1]),
            entry: f64::from_bits(k[2]),
            count: c as f64,
        }));
        for (age, [f, s]) in plain {
            if f > 0 {
                out.push(Obs {
                    earliest: age,
                    latest: age,
                    entry: 0.0,
                    count: f as f64,
                });
            }
            if s > 0 {
                out.push(Obs {
                    earliest: age,
                    latest: f64::INFINITY,
                    entry: 0.0,
                    count: s as f64,
                });
            }
        }
        // The plain part comes sorted (a failure before a suspension at the
        // same age); only other kinds need the sort.
        if !self.groups.is_empty() {
            out.sort_by(|a, b| {
                a.earliest
                    .total_cmp(&b.earliest)
                    .then(a.latest.total_cmp(&b.latest))
                    .then(a.entry.total_cmp(&b.entry))
            });
        }
        out
    }

    /// Right-censored data merged by age (failures and suspensions per
    /// distinct age), sorted by age; valid when [`Sample::is_right_censored_only`].
    pub fn groups(&self) -> Vec<AgeGroup> {
        if self.groups.is_empty() {
            return self
                .plain
                .sorted()
                .into_iter()
                .map(|(age, [f, s])| AgeGroup {
                    age,
                    failures: f as f64,
                    suspensions: s as f64,
                })
                .collect();
        }
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

    /// The counting table and the map together must hold exactly what a
    /// plain ordered map of every row holds, whatever the order of arrival,
    /// as the table grows and moves ages out of the map, and as rows leave.
    #[test]
    fn table_and_map_agree_with_an_ordered_map() {
        use std::collections::BTreeMap;
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = move || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        for round in 0..20 {
            let mut s = Sample::new();
            let mut reference: BTreeMap<(u64, bool), u64> = BTreeMap::new();
            let mut rows = Vec::new();
            for _ in 0..(50 + round * 200) {
                let r = next();
                let age = match r % 5 {
                    0 => (r >> 8) as f64 % 40.0,          // small whole numbers
                    1 => ((r >> 8) % 20_000) as f64,      // whole numbers, table grows
                    2 => ((r >> 8) % 1000) as f64 + 0.25, // fractional: the map
                    3 => 1e7 + ((r >> 8) % 5) as f64,     // whole, beyond the table
                    // zero, huge, and whole numbers at the edge of usize
                    _ => [0.0, 1e300, 2f64.powi(64), 2f64.powi(63), 2f64.powi(53)]
                        [((r >> 8) % 5) as usize],
                };
                let failed = age > 0.0 && (r >> 40) % 3 == 0;
                s.add(age, failed).unwrap();
                *reference.entry((age.to_bits(), failed)).or_default() += 1;
                rows.push((age, failed));
            }
            let check = |s: &Sample, reference: &BTreeMap<(u64, bool), u64>| {
                let mut want: Vec<Obs> = reference
                    .iter()
                    .filter(|(_, &c)| c > 0)
                    .map(|(&(bits, failed), &c)| {
                        let age = f64::from_bits(bits);
                        Obs {
                            earliest: age,
                            latest: if failed { age } else { f64::INFINITY },
                            entry: 0.0,
                            count: c as f64,
                        }
                    })
                    .collect();
                want.sort_by(|a, b| {
                    a.earliest
                        .total_cmp(&b.earliest)
                        .then(a.latest.total_cmp(&b.latest))
                });
                assert_eq!(s.obs(), want);
                assert_eq!(s.distinct(), want.len());
                let units: u64 = reference.values().sum();
                assert_eq!(s.len(), units);
            };
            check(&s, &reference);
            for &(age, failed) in rows.iter().step_by(2) {
                s.remove(age, failed).unwrap();
                *reference.get_mut(&(age.to_bits(), failed)).unwrap() -= 1;
            }
            check(&s, &reference);
            assert!(s.remove(123.5, true).is_err());
        }
    }

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
