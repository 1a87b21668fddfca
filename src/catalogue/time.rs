//! Reading a time argument: a number, or a date-time written as text.
//!
//! `dist_series(x, t)` needs only the order of its readings in time, and users keep their
//! timestamps as ISO-8601 text (`'2024-09-02 05:00'`) as often as numbers. So a time may
//! be an INTEGER or REAL (any unit: seconds, Julian days, a counter), numeric TEXT, or
//! TEXT in one of the ISO-8601 forms that SQLite's date functions read:
//! `YYYY-MM-DD`, optionally followed by a space or `T` and `HH:MM`, `HH:MM:SS` or
//! `HH:MM:SS.fff`, optionally followed by `Z` or an offset `+HH:MM` / `-HH:MM` (the time is
//! then moved to UTC, as SQLite does). The text becomes seconds since 1970-01-01 UTC on the
//! proleptic Gregorian calendar (days from H. Hinnant's `days_from_civil` algorithm,
//! "chrono-Compatible Low-Level Date Algorithms", 2013). A time of day without a date is
//! refused: readings across midnight would sort out of order. So is a day that does not
//! exist (`2024-02-30`), which SQLite would carry over into March.
//!
//! The same text reads the same in every engine, so a query written with `ts` works on
//! SQLite and on DataFusion alike, where `unixepoch(ts)` is SQLite's own.

use super::args::{ArgError, number};
use super::value::{Arg, describe};

/// A time argument: NULL gives `None`; a number (or numeric TEXT) is taken as it is;
/// other TEXT must be an ISO-8601 date or date-time (see the module docs) and gives
/// seconds since 1970-01-01 UTC.
///
/// # Errors
/// [`ArgError::NotTime`] for TEXT that is neither a number nor such a date-time, and for
/// a BLOB.
///
/// # Example
/// ```
/// use ogive::catalogue::{time::time, value::Arg};
/// assert_eq!(time(Arg::Text(b"1970-01-02 00:00"), "t"), Ok(Some(86400.0)));
/// assert_eq!(time(Arg::Integer(7), "t"), Ok(Some(7.0)));
/// assert!(time(Arg::Text(b"05:00"), "t").is_err());
/// ```
pub fn time(v: Arg<'_>, what: &'static str) -> Result<Option<f64>, ArgError> {
    match v {
        Arg::Text(t) if !looks_numeric(t) => std::str::from_utf8(t)
            .ok()
            .and_then(|s| seconds(s.trim()))
            .map(Some)
            .ok_or_else(|| ArgError::NotTime {
                what,
                shown: describe(v),
            }),
        Arg::Blob(_) => Err(ArgError::NotTime {
            what,
            shown: describe(v),
        }),
        _ => number(v, what),
    }
}

/// Whether TEXT is made only of what a number is written with (then [`number`] reads it).
fn looks_numeric(t: &[u8]) -> bool {
    let t = t.trim_ascii();
    !t.is_empty()
        && t.iter().all(|b| b.is_ascii_digit() || b"+-.eE".contains(b))
        && t.iter().filter(|&&b| b == b'-').count() < 2
}

/// Seconds since 1970-01-01 00:00 UTC of an ISO-8601 date or date-time, or `None` when
/// the text is not one (or names a day or time that does not exist).
fn seconds(s: &str) -> Option<f64> {
    let b = s.as_bytes();
    let year = digits(b, 0, 4)?;
    if b.get(4) != Some(&b'-') || b.get(7) != Some(&b'-') {
        return None;
    }
    let month = digits(b, 5, 2)?;
    let day = digits(b, 8, 2)?;
    if !(1..=12).contains(&month) || day < 1 || day > days_in_month(year, month) {
        return None;
    }
    let mut at = 10;
    let mut clock = 0.0;
    if matches!(b.get(at), Some(b' ' | b'T' | b't'))
        && b.get(at + 1).is_some_and(u8::is_ascii_digit)
    {
        let (secs, used) = time_of_day(&b[at + 1..])?;
        clock = secs;
        at += 1 + used;
    }
    let offset = zone(b[at..].trim_ascii_start())?;
    let days = days_from_civil(year, month, day);
    Some(days as f64 * 86_400.0 + clock - offset)
}

/// `HH:MM`, `HH:MM:SS` or `HH:MM:SS.fff` at the start of `b`: its seconds and length.
fn time_of_day(b: &[u8]) -> Option<(f64, usize)> {
    let hour = digits(b, 0, 2)?;
    if b.get(2) != Some(&b':') {
        return None;
    }
    let minute = digits(b, 3, 2)?;
    if hour > 23 || minute > 59 {
        return None;
    }
    let mut secs = (hour * 3600 + minute * 60) as f64;
    let mut used = 5;
    if b.get(5) == Some(&b':') {
        let second = digits(b, 6, 2)?;
        if second > 59 {
            return None;
        }
        secs += second as f64;
        used = 8;
        if b.get(8) == Some(&b'.') {
            let frac = b[9..].iter().take_while(|c| c.is_ascii_digit()).count();
            if frac == 0 {
                return None;
            }
            let text = std::str::from_utf8(&b[8..9 + frac]).ok()?;
            secs += format!("0{text}").parse::<f64>().ok()?;
            used = 9 + frac;
        }
    }
    Some((secs, used))
}

/// The time zone suffix: nothing or `Z` (UTC), or `+HH:MM` / `-HH:MM`: its offset in
/// seconds east of UTC. Anything else after the time is not a date-time.
fn zone(b: &[u8]) -> Option<f64> {
    match b {
        [] | [b'Z' | b'z'] => Some(0.0),
        [sign @ (b'+' | b'-'), rest @ ..] if rest.len() == 5 && rest[2] == b':' => {
            let hours = digits(rest, 0, 2)?;
            let minutes = digits(rest, 3, 2)?;
            if hours > 14 || minutes > 59 {
                return None;
            }
            let east = (hours * 3600 + minutes * 60) as f64;
            Some(if *sign == b'+' { east } else { -east })
        }
        _ => None,
    }
}

/// `n` ASCII digits at `b[at..]` as a number.
fn digits(b: &[u8], at: usize, n: usize) -> Option<i64> {
    let part = b.get(at..at + n)?;
    part.iter().try_fold(0i64, |acc, &c| {
        c.is_ascii_digit().then(|| acc * 10 + i64::from(c - b'0'))
    })
}

/// The number of days in a month of the proleptic Gregorian calendar.
fn days_in_month(year: i64, month: i64) -> i64 {
    match month {
        2 if year % 4 == 0 && (year % 100 != 0 || year % 400 == 0) => 29,
        2 => 28,
        4 | 6 | 9 | 11 => 30,
        _ => 31,
    }
}

/// Days since 1970-01-01 of a valid Gregorian date (Hinnant's `days_from_civil`).
fn days_from_civil(year: i64, month: i64, day: i64) -> i64 {
    let y = if month <= 2 { year - 1 } else { year };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (month + 9) % 12;
    let doy = (153 * mp + 2) / 5 + day - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

#[cfg(test)]
mod tests {
    use super::*;

    fn t(s: &str) -> Option<f64> {
        time(Arg::Text(s.as_bytes()), "t").ok().flatten()
    }

    #[test]
    fn the_forms_sqlite_reads() {
        // Expected values: SQLite 3.40.1's `SELECT unixepoch('...')` on the Debian sqlite3
        // CLI, run by hand (the fraction from `julianday`). SQLite refuses the padded form
        // (NULL); ogive trims spaces around every TEXT argument, so it reads it.
        assert_eq!(t("2024-09-02"), Some(1_725_235_200.0));
        assert_eq!(t("2024-09-02 05:00"), Some(1_725_253_200.0));
        assert_eq!(t("2024-09-02T05:00:30"), Some(1_725_253_230.0));
        assert_eq!(t("2024-09-02 05:00:30.250"), Some(1_725_253_230.25));
        assert_eq!(t("2024-09-02 07:00+02:00"), Some(1_725_253_200.0));
        assert_eq!(
            t("2024-09-02 00:00-05:30"),
            Some(1_725_235_200.0 + 19_800.0)
        );
        assert_eq!(t(" 2024-09-02 05:00Z "), Some(1_725_253_200.0));
        assert_eq!(t("2000-02-29"), Some(951_782_400.0));
        assert_eq!(t("1969-12-31 23:59:59"), Some(-1.0));
        assert_eq!(t("0001-01-01"), Some(-62_135_596_800.0));
    }

    #[test]
    fn numbers_stay_numbers() {
        assert_eq!(t("12.5"), Some(12.5));
        assert_eq!(t("-3e2"), Some(-300.0));
        assert_eq!(time(Arg::Real(2.0), "t"), Ok(Some(2.0)));
        assert_eq!(time(Arg::Null, "t"), Ok(None));
    }

    #[test]
    fn what_is_not_a_date_time_is_refused() {
        for bad in [
            "05:00",
            "2024-9-2",
            "2024-02-30",
            "2023-02-29",
            "2024-13-01",
            "2024-09-02 24:00",
            "2024-09-02 05:60",
            "2024-09-02 05:00:61",
            "2024-09-02 05:00:00.",
            "2024-09-02 05:00 tomorrow",
            "2024-09-02 05:00+2",
            "yesterday",
            "",
        ] {
            assert_eq!(t(bad), None, "{bad:?}");
        }
        let e = time(Arg::Text(b"05:00"), "t").unwrap_err();
        assert!(e.to_string().contains("date"), "{e}");
        assert!(time(Arg::Blob(b"\x01"), "t").is_err());
    }

    #[test]
    fn days_from_civil_counts_every_day() {
        // Exhaustive over 1600-2400: consecutive valid dates are one day apart.
        let mut last = days_from_civil(1599, 12, 31);
        for year in 1600..=2400 {
            for month in 1..=12 {
                for day in 1..=days_in_month(year, month) {
                    let d = days_from_civil(year, month, day);
                    assert_eq!(d, last + 1, "{year}-{month}-{day}");
                    last = d;
                }
            }
        }
        assert_eq!(days_from_civil(1970, 1, 1), 0);
    }
}
