//! How the shell reads a piece of text as an SQL value: CSV cells and `--param` values.
//!
//! A cell is INTEGER when it is an optional sign and digits that fit in 64 bits, REAL when
//! it is a decimal number (`-1.5`, `.5`, `2e-3`) with a finite value, empty when it has no
//! characters, and TEXT otherwise. Surrounding spaces are ignored for numbers. A number
//! written with a leading zero (`007`, `01.5`) stays TEXT: it is usually a code, not a
//! quantity. Words such as `inf` or `nan` are TEXT.

use rusqlite::types::Value;

/// What a cell holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Class {
    Empty,
    Integer,
    Real,
    Text,
}

/// Classifies one cell.
pub fn classify(cell: &str) -> Class {
    if cell.is_empty() {
        return Class::Empty;
    }
    let s = trim_spaces(cell);
    let b = s.as_bytes();
    let digits_from = usize::from(matches!(b.first(), Some(b'+' | b'-')));
    let body = &b[digits_from..];
    if body.is_empty() {
        return Class::Text;
    }
    let int_len = body.iter().take_while(|c| c.is_ascii_digit()).count();
    if int_len > 1 && body[0] == b'0' {
        return Class::Text;
    }
    if int_len == body.len() {
        // Up to 18 digits always fit in an i64; longer ones are checked.
        return if int_len <= 18 || s.parse::<i64>().is_ok() {
            Class::Integer
        } else if s.parse::<f64>().is_ok_and(f64::is_finite) {
            Class::Real
        } else {
            Class::Text
        };
    }
    let rest = &body[int_len..];
    if !decimal_syntax(rest, int_len > 0) {
        return Class::Text;
    }
    // Without an exponent a decimal number is finite; with one it may overflow.
    if !rest.iter().any(|c| matches!(c, b'e' | b'E')) {
        return Class::Real;
    }
    match s.parse::<f64>() {
        Ok(v) if v.is_finite() => Class::Real,
        _ => Class::Text,
    }
}

/// The cell without surrounding spaces (a quick look at both ends first: most cells have
/// none).
pub fn trim_spaces(cell: &str) -> &str {
    let b = cell.as_bytes();
    if b.first() == Some(&b' ') || b.last() == Some(&b' ') {
        cell.trim_matches(' ')
    } else {
        cell
    }
}

/// Checks the part of a decimal number after its integer digits: `[.digits][e[sign]digits]`.
fn decimal_syntax(rest: &[u8], had_digits: bool) -> bool {
    let mut i = 0;
    let mut digits = had_digits;
    if rest.first() == Some(&b'.') {
        i = 1;
        while i < rest.len() && rest[i].is_ascii_digit() {
            i += 1;
            digits = true;
        }
    }
    if !digits {
        return false;
    }
    if i < rest.len() && matches!(rest[i], b'e' | b'E') {
        i += 1;
        if i < rest.len() && matches!(rest[i], b'+' | b'-') {
            i += 1;
        }
        let start = i;
        while i < rest.len() && rest[i].is_ascii_digit() {
            i += 1;
        }
        if i == start {
            return false;
        }
    }
    i == rest.len()
}

/// The SQL value of a text by [`classify`]: empty text is NULL.
pub fn value(text: &str) -> Value {
    match classify(text) {
        Class::Empty => Value::Null,
        Class::Integer => text
            .trim_matches(' ')
            .parse()
            .map_or_else(|_| Value::Text(text.into()), Value::Integer),
        Class::Real => text
            .trim_matches(' ')
            .parse()
            .map_or_else(|_| Value::Text(text.into()), Value::Real),
        Class::Text => Value::Text(text.to_string()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn classes() {
        for (cell, class) in [
            ("", Class::Empty),
            ("0", Class::Integer),
            ("-12", Class::Integer),
            ("+7", Class::Integer),
            (" 42 ", Class::Integer),
            ("9223372036854775807", Class::Integer),
            ("9223372036854775808", Class::Real),
            ("3.5", Class::Real),
            ("-0.25", Class::Real),
            (".5", Class::Real),
            ("5.", Class::Real),
            ("1e-3", Class::Real),
            ("2.5E+10", Class::Real),
            ("1e999", Class::Text),
            ("123456789012345678", Class::Integer),
            ("1234567890123456789012", Class::Real),
            (&"9".repeat(400), Class::Text),
            ("007", Class::Text),
            ("01.5", Class::Text),
            ("inf", Class::Text),
            ("NaN", Class::Text),
            ("-", Class::Text),
            (".", Class::Text),
            ("1e", Class::Text),
            ("12a", Class::Text),
            ("TR01", Class::Text),
            ("1,5", Class::Text),
        ] {
            assert_eq!(classify(cell), class, "{cell:?}");
        }
    }

    #[test]
    fn values() {
        assert_eq!(value(""), Value::Null);
        assert_eq!(value("10"), Value::Integer(10));
        assert_eq!(value("0.5"), Value::Real(0.5));
        assert_eq!(value("007"), Value::Text("007".into()));
    }
}
