//! Numbers with units for the command line: `98.304MHz`, `384kHz`, `48k`,
//! `20ns`, `1.5us`, `-1dBFS`.
//!
//! SI prefixes are case-sensitive (`M` mega, `m` milli) except that `K` is
//! taken as kilo; `u`, `µ` and `μ` are micro. The unit (`Hz`, `s`, `dB`,
//! `dBFS`) may be left out, and a space may separate it from the number.

use std::format;
use std::string::String;

fn prefix_factor(p: &str) -> Option<f64> {
    Some(match p {
        "" => 1.0,
        "G" => 1e9,
        "M" => 1e6,
        "k" | "K" => 1e3,
        "m" => 1e-3,
        "u" | "µ" | "μ" => 1e-6,
        "n" => 1e-9,
        "p" => 1e-12,
        _ => return None,
    })
}

/// Split `s` into the number and what follows it.
fn split_number(s: &str) -> (&str, &str) {
    let s = s.trim();
    let end = s
        .char_indices()
        .find(|&(i, c)| {
            !(c.is_ascii_digit()
                || c == '.'
                || c == '+'
                || c == '-'
                || ((c == 'e' || c == 'E')
                    && s[i + 1..]
                        .starts_with(|d: char| d.is_ascii_digit() || d == '-' || d == '+')))
        })
        .map_or(s.len(), |(i, _)| i);
    (&s[..end], s[end..].trim())
}

fn parse_with_unit(s: &str, units: &[&str], what: &str) -> Result<f64, String> {
    let (num, rest) = split_number(s);
    let value: f64 = num
        .parse()
        .map_err(|_| format!("{what}: cannot read a number in {s:?}"))?;
    let mut prefix = rest;
    for u in units {
        if rest.len() >= u.len() && rest[rest.len() - u.len()..].eq_ignore_ascii_case(u) {
            prefix = &rest[..rest.len() - u.len()];
            break;
        }
    }
    let factor = prefix_factor(prefix.trim())
        .ok_or_else(|| format!("{what}: unknown unit {rest:?} in {s:?}"))?;
    let v = value * factor;
    if !v.is_finite() {
        return Err(format!("{what}: {s:?} is not finite"));
    }
    Ok(v)
}

/// A frequency in Hz: `98.304MHz`, `384kHz`, `48k`, `997`.
///
/// # Errors
/// A message naming the text that could not be read.
pub fn parse_hz(s: &str) -> Result<f64, String> {
    parse_with_unit(s, &["Hz"], "frequency")
}

/// A time in seconds: `20ns`, `1.5us`, `0.5s`, `2ms`.
///
/// # Errors
/// A message naming the text that could not be read.
pub fn parse_seconds(s: &str) -> Result<f64, String> {
    parse_with_unit(s, &["s"], "time")
}

/// A level in dB: `-1`, `-1dB`, `-60 dBFS` (no prefixes).
///
/// # Errors
/// A message naming the text that could not be read.
pub fn parse_db(s: &str) -> Result<f64, String> {
    let (num, rest) = split_number(s);
    let ok =
        rest.is_empty() || rest.eq_ignore_ascii_case("db") || rest.eq_ignore_ascii_case("dbfs");
    if !ok {
        return Err(format!("level: unknown unit {rest:?} in {s:?}"));
    }
    let v: f64 = num
        .parse()
        .map_err(|_| format!("level: cannot read a number in {s:?}"))?;
    if !v.is_finite() {
        return Err(format!("level: {s:?} is not finite"));
    }
    Ok(v)
}
