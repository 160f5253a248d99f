//! Elapsed usage between two timestamps, in the forms SQLite stores them.
//!
//! Accepts ISO-8601 text (date, optional time with optional fraction,
//! optional `Z` or `+HH:MM` zone), Julian day numbers and Unix seconds,
//! telling numbers apart by the same ranges SQLite's `auto` date modifier
//! uses. Knows nothing of SQL.

use crate::error::{show_number, LifeError, LifeResult};
use chrono::{NaiveDate, NaiveTime};

/// Largest number read as a Julian day number (SQLite's `auto` rule);
/// larger magnitudes are read as Unix seconds.
pub const MAX_JULIAN_DAY: f64 = 5_373_484.499_999;
/// Unix seconds of the first instant SQLite dates support (-4713-11-24).
pub const MIN_UNIX: f64 = -210_866_760_000.0;
/// Unix seconds of the last instant SQLite dates support (9999-12-31 23:59:59).
pub const MAX_UNIX: f64 = 253_402_300_799.0;

/// An instant as whole Unix seconds plus a fraction in [0, 1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Instant {
    secs: i64,
    frac: f64,
}

impl Instant {
    fn from_unix_f64(x: f64) -> Self {
        let secs = x.floor();
        Instant {
            secs: secs as i64,
            frac: x - secs,
        }
    }

    /// Seconds from `self` to `later`.
    pub fn seconds_until(&self, later: &Instant) -> f64 {
        (later.secs - self.secs) as f64 + (later.frac - self.frac)
    }
}

/// Units `life_usage` can report in, with their length in seconds.
pub const UNITS: &[(&str, f64)] = &[
    ("seconds", 1.0),
    ("minutes", 60.0),
    ("hours", 3600.0),
    ("days", 86400.0),
];

/// Seconds per unit for a unit name.
pub fn unit_seconds(name: &str) -> LifeResult<f64> {
    let key = name.trim().to_ascii_lowercase();
    UNITS
        .iter()
        .find(|(n, _)| *n == key)
        .map(|(_, s)| *s)
        .ok_or_else(|| LifeError::BadArgument {
            arg: "unit",
            expected: "must be 'seconds', 'minutes', 'hours' or 'days'",
            got: format!("'{}'", clip(name)),
        })
}

/// Reads a number as a Julian day number or as Unix seconds.
pub fn instant_from_number(arg: &'static str, x: f64) -> LifeResult<Instant> {
    if (0.0..=MAX_JULIAN_DAY).contains(&x) {
        return Ok(Instant::from_unix_f64((x - 2_440_587.5) * 86_400.0));
    }
    if (MIN_UNIX..=MAX_UNIX).contains(&x) {
        return Ok(Instant::from_unix_f64(x));
    }
    Err(LifeError::BadArgument {
        arg,
        expected: "must be a date: ISO-8601 text, a Julian day number (0 to 5373484.5) \
                   or Unix seconds (-210866760000 to 253402300799)",
        got: show_number(x),
    })
}

/// Reads ISO-8601 text (or numeric text) as an instant.
pub fn instant_from_text(arg: &'static str, text: &str) -> LifeResult<Instant> {
    let s = text.trim();
    if let Ok(x) = s.parse::<f64>() {
        if s.bytes()
            .all(|b| b.is_ascii_digit() || b"+-.eE".contains(&b))
        {
            return instant_from_number(arg, x);
        }
    }
    parse_iso(s).ok_or_else(|| {
        LifeError::BadTimestamp(format!(
            "{arg} is not a valid date or time, got '{}' \
             (expected e.g. '2024-03-01', '2024-03-01 14:30:00', '2024-03-01T14:30:00+02:00')",
            clip(text)
        ))
    })
}

fn digits(s: &str, n: usize) -> Option<u32> {
    if s.len() == n && s.bytes().all(|b| b.is_ascii_digit()) {
        s.parse().ok()
    } else {
        None
    }
}

/// `YYYY-MM-DD[(T| )HH:MM[:SS[.fff]]][ ][Z|(+|-)HH:MM]`; None for anything else
/// or for a day or time that does not exist (2023-02-30, 24:00).
fn parse_iso(s: &str) -> Option<Instant> {
    if !s.is_ascii() || s.len() < 10 {
        return None;
    }
    let (date, rest) = s.split_at(10);
    let year = digits(&date[0..4], 4)? as i32;
    if &date[4..5] != "-" || &date[7..8] != "-" {
        return None;
    }
    let day = NaiveDate::from_ymd_opt(year, digits(&date[5..7], 2)?, digits(&date[8..10], 2)?)?;
    // Zone suffix.
    let mut body = rest.trim_end();
    let mut offset: i64 = 0;
    if let Some(b) = body.strip_suffix(['Z', 'z']) {
        body = b.trim_end();
    } else if body.len() >= 6 {
        let (b, zone) = body.split_at(body.len() - 6);
        let sign = match &zone[0..1] {
            "+" => Some(1),
            "-" => Some(-1),
            _ => None,
        };
        if let Some(sign) = sign {
            if b.len() > 1 {
                let hh = digits(&zone[1..3], 2)?;
                let mm = digits(&zone[4..6], 2)?;
                if &zone[3..4] != ":" || hh > 14 || mm > 59 {
                    return None;
                }
                offset = sign * (hh as i64 * 3600 + mm as i64 * 60);
                body = b.trim_end();
            }
        }
    }
    let (time, nanos) = if body.is_empty() {
        (NaiveTime::MIN, 0)
    } else {
        let t = body.strip_prefix(['T', 't', ' '])?;
        let (hms, frac) = match t.split_once('.') {
            Some((a, f)) => (a, Some(f)),
            None => (t, None),
        };
        let parts: Vec<&str> = hms.split(':').collect();
        let (h, m, sec) = match parts.as_slice() {
            [h, m] => (digits(h, 2)?, digits(m, 2)?, 0),
            [h, m, s] => (digits(h, 2)?, digits(m, 2)?, digits(s, 2)?),
            _ => return None,
        };
        let nanos = match frac {
            None => 0,
            Some(f) if parts.len() == 3 && !f.is_empty() && f.len() <= 9 => {
                digits(f, f.len())? * 10u32.pow(9 - f.len() as u32)
            }
            Some(_) => return None,
        };
        (NaiveTime::from_hms_opt(h, m, sec)?, nanos)
    };
    let secs = day.and_time(time).and_utc().timestamp() - offset;
    Some(Instant {
        secs,
        frac: nanos as f64 * 1e-9,
    })
}

fn clip(text: &str) -> String {
    let head: String = text.chars().take(60).collect();
    if head.len() < text.len() {
        format!("{head}...")
    } else {
        head
    }
}

/// Elapsed time from `start` to `end` in `unit_secs` seconds per unit;
/// an end before the start is an error (a life cannot be negative).
pub fn elapsed(start: Instant, end: Instant, unit_secs: f64) -> LifeResult<f64> {
    let secs = start.seconds_until(&end);
    if secs < 0.0 {
        return Err(LifeError::BadTimestamp(format!(
            "end is {} seconds before start; a usage interval cannot be negative",
            show_number(-secs)
        )));
    }
    Ok(secs / unit_secs)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn at(s: &str) -> Instant {
        instant_from_text("start", s).unwrap()
    }

    #[test]
    fn iso_forms_agree() {
        // Unix epoch in several spellings.
        let epoch = Instant { secs: 0, frac: 0.0 };
        for s in [
            "1970-01-01",
            "1970-01-01 00:00",
            "1970-01-01T00:00:00",
            "1970-01-01 00:00:00.000",
            "1970-01-01T02:00:00+02:00",
            "1969-12-31 19:00:00 -05:00",
            "1970-01-01T00:00:00Z",
            "2440587.5",
        ] {
            assert_eq!(at(s), epoch, "{s}");
        }
        let t = at("2024-02-29 12:30:15.25");
        assert_eq!(t.secs, 1_709_209_815);
        assert_eq!(t.frac, 0.25);
    }

    #[test]
    fn impossible_dates_are_refused() {
        for s in [
            "2023-02-30",
            "2024-13-01",
            "2024-01-01 24:00",
            "2024-01-01 12:60",
            "yesterday",
            "2024-1-1",
            "2024-01-01 12:00:00+25:00",
            "",
        ] {
            assert!(instant_from_text("start", s).is_err(), "{s}");
        }
    }
}
