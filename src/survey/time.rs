//! Time stamps of sweeps: a `# time = ...` (or `timestamp`, `datetime`, `date_time`,
//! `measured`, `start_time`) metadata entry, read as seconds so that a survey can be put in time
//! order and say when the bench was quietest.
//!
//! ```
//! use spurhound::survey::time::{parse_stamp, Form};
//! let s = parse_stamp("2031-05-14T06:14:24Z").unwrap();
//! assert_eq!(s.form, Form::DateTime);
//! // source: derived, 2031-05-14 is day 22413 after 1970-01-01 (proleptic Gregorian count)
//! assert_eq!(s.seconds, 22413.0 * 86400.0 + 6.0 * 3600.0 + 14.0 * 60.0 + 24.0);
//! ```

use crate::scan::Scan;

/// What a time stamp states.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Form {
    /// A calendar date, with or without a time of day: seconds since 1970-01-01 00:00 UTC.
    DateTime,
    /// A time of day only: seconds since midnight.
    TimeOfDay,
    /// A plain number of seconds (an instrument counter or a Unix time).
    Seconds,
}

/// A parsed time stamp.
#[derive(Debug, Clone, PartialEq)]
pub struct Stamp {
    /// The text as written in the file.
    pub text: String,
    pub seconds: f64,
    pub form: Form,
}

/// Metadata keys that carry a sweep's time (compared without case, blanks or punctuation).
pub const TIME_KEYS: [&str; 7] = [
    "time",
    "timestamp",
    "datetime",
    "measured",
    "measuredat",
    "starttime",
    "sweeptime",
];

/// The time entry of a scan's metadata, if any: `(key, value)` as written.
pub fn time_entry(scan: &Scan) -> Option<(&str, &str)> {
    scan.meta.extra.iter().find_map(|(k, v)| {
        let key: String = k
            .chars()
            .filter(|c| c.is_ascii_alphanumeric())
            .collect::<String>()
            .to_ascii_lowercase();
        TIME_KEYS
            .contains(&key.as_str())
            .then_some((k.as_str(), v.as_str()))
    })
}

/// Days from 1970-01-01 to `y-m-d` in the proleptic Gregorian calendar.
///
/// # Formula
/// Shift the year to start in March (so the leap day ends it), count whole 400-year eras of
/// 146097 days, then years of the era (365 days, +1 every 4th, −1 every 100th) and the day of
/// the shifted year, ⌊(153·m' + 2)/5⌋ + d − 1 with m' = 0 for March; 719468 is the count of
/// 1970-01-01 from 0000-03-01.
/// # Source
/// Standard calendar arithmetic (the Gregorian 400-year cycle); check value 2000-03-01 = 11017.
pub fn days_from_civil(y: i64, m: u32, d: u32) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = i64::from((m + 9) % 12);
    let doy = (153 * mp + 2) / 5 + i64::from(d) - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// Reads `2031-05-14`, `2031-05-14T06:14[:24[.5]]` (or a blank for `T`) with an optional `Z`
/// or `±hh:mm` offset, a time of day `06:14[:24]`, or a number of seconds. `None` when the text
/// is none of these or a field is out of range.
pub fn parse_stamp(text: &str) -> Option<Stamp> {
    let t = text.trim();
    let stamp = |seconds: f64, form: Form| {
        seconds.is_finite().then(|| Stamp {
            text: t.to_string(),
            seconds,
            form,
        })
    };
    if let Ok(x) = t.parse::<f64>() {
        return stamp(x, Form::Seconds);
    }
    if let Some(s) = time_of_day(t) {
        return stamp(s, Form::TimeOfDay);
    }
    let (date, rest) = match t.find(['T', 't', ' ']) {
        Some(i) => (&t[..i], Some(&t[i + 1..])),
        None => (t, None),
    };
    let days = date_days(date)?;
    let (clock, offset) = match rest {
        None => (0.0, 0.0),
        Some(r) => split_offset(r.trim())?,
    };
    stamp(days as f64 * 86_400.0 + clock - offset, Form::DateTime)
}

fn date_days(date: &str) -> Option<i64> {
    let mut it = date.split('-');
    let y: i64 = it.next()?.parse().ok()?;
    let m: u32 = it.next()?.parse().ok()?;
    let d: u32 = it.next()?.parse().ok()?;
    if it.next().is_some() || !(1..=12).contains(&m) || !(1..=31).contains(&d) {
        return None;
    }
    Some(days_from_civil(y, m, d))
}

/// A time of day with its offset from UTC in seconds: `06:14:24Z`, `06:14+02:00`.
fn split_offset(r: &str) -> Option<(f64, f64)> {
    if let Some(c) = r.strip_suffix(['Z', 'z']) {
        return Some((time_of_day(c)?, 0.0));
    }
    if let Some(i) = r.rfind(['+', '-']) {
        let (c, off) = (&r[..i], &r[i..]);
        let sign = if off.starts_with('-') { -1.0 } else { 1.0 };
        let hm = time_of_day(&off[1..])?;
        return Some((time_of_day(c)?, sign * hm));
    }
    Some((time_of_day(r)?, 0.0))
}

/// `hh:mm[:ss[.f]]` as seconds since midnight (an offset `hh:mm` reads the same way).
fn time_of_day(t: &str) -> Option<f64> {
    let mut it = t.split(':');
    let h: u32 = it.next()?.trim().parse().ok()?;
    let m: u32 = it.next()?.trim().parse().ok()?;
    let s: f64 = match it.next() {
        Some(x) => x.trim().parse().ok()?,
        None => 0.0,
    };
    if it.next().is_some() || h > 24 || m > 59 || !(0.0..61.0).contains(&s) {
        return None;
    }
    Some(f64::from(h) * 3600.0 + f64::from(m) * 60.0 + s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn day_count_of_known_dates() {
        // source: derived, 1970-01-01 is day 0; 2000-03-01 follows 30 years (7 leap days) and
        // 31 + 29 days of 2000: 30·365 + 7 + 60 = 11017
        assert_eq!(days_from_civil(1970, 1, 1), 0);
        assert_eq!(days_from_civil(2000, 3, 1), 11_017);
        assert_eq!(days_from_civil(1969, 12, 31), -1);
    }

    #[test]
    fn stamps_in_their_forms() {
        let a = parse_stamp("2031-05-14T06:00:00").unwrap();
        let b = parse_stamp("2031-05-14 08:00+02:00").unwrap();
        assert_eq!(a.seconds, b.seconds, "the same instant in two zones");
        assert_eq!(parse_stamp("2031-05-14").unwrap().form, Form::DateTime);
        let t = parse_stamp("06:14:24.5").unwrap();
        assert_eq!((t.form, t.seconds), (Form::TimeOfDay, 22_464.5));
        assert_eq!(parse_stamp("1234.5").unwrap().form, Form::Seconds);
        for bad in ["yesterday", "2031-13-01", "25:00", "2031-05-14T06:61", ""] {
            assert!(parse_stamp(bad).is_none(), "{bad}");
        }
    }
}
