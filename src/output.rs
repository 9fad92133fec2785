//! The one output layer: how rung writes numbers and names in tables, JSON
//! and CSV. Every command's table lines, JSON documents and CSV fields, the
//! budget's and the plan's exports and the terminal UI's cells go through it,
//! so these rules hold everywhere:
//!
//! - A number that is not finite (no value, NaN, infinity) is `null` in JSON,
//!   an empty field in CSV and [`MISSING`] in a table: never `inf` or `NaN`.
//! - A number that rounds to zero at the precision shown carries no sign:
//!   never `-0.00`, `-0.0` or `-0` (in tables, JSON and CSV alike).
//! - Text that came from a file (target names, notes) cannot drive the
//!   terminal: control characters (escape sequences, carriage returns, tabs)
//!   and the Unicode controls that reorder a line (bidirectional overrides and
//!   isolates) are shown as escapes (`\x1b`, `\u{202e}`) in tables and in the
//!   UI. JSON and CSV keep the text as it is (their own quoting makes it inert).
//! - A Markdown cell escapes `|`, so a name cannot split the proposal's table.
//! - A clock time (`HH:MM`, UTC or local) is read off the instant rounded to
//!   the second, as JSON writes it ([`clock_hm`]): a table, the UI and
//!   `--json` never disagree on the minute.

use serde::Serialize;
use std::borrow::Cow;

/// What a table shows for a number that has no value.
pub const MISSING: &str = "-";

/// A character a table shows as an escape: C0 and C1 controls except the
/// line break, DEL, and the bidirectional formatting characters (marks,
/// embeddings, overrides, isolates) that reorder what follows them.
fn hidden(c: char) -> bool {
    (c.is_control() && c != '\n')
        || matches!(c, '\u{200e}' | '\u{200f}' | '\u{061c}' | '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}')
}

fn escape_into(out: &mut String, c: char) {
    use std::fmt::Write;
    if (c as u32) < 0x100 {
        let _ = write!(out, "\\x{:02x}", c as u32);
    } else {
        let _ = write!(out, "\\u{{{:x}}}", c as u32);
    }
}

/// Text for a terminal: control and bidirectional formatting characters
/// shown as escapes (`ESC` → `\x1b`, U+202E → `\u{202e}`, a tab → `\x09`);
/// line breaks kept. Borrowed when there is nothing to escape.
pub fn text(s: &str) -> Cow<'_, str> {
    if !s.chars().any(hidden) {
        return Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        if hidden(c) {
            escape_into(&mut out, c);
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

/// A text on one line: [`text`] with line breaks escaped too (for a cell, a
/// status line or a one-line message).
pub fn one_line(s: &str) -> Cow<'_, str> {
    if !s.chars().any(|c| hidden(c) || c == '\n') {
        return Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        if hidden(c) || c == '\n' {
            escape_into(&mut out, c);
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

/// A table line as printed: [`text`] (escapes), and no sign on a number that
/// is written as zero (`-0.00` → ` 0.00`, keeping the column's width).
///
/// A number here is a run of digits with an optional fraction that is not
/// part of a longer token (a date, a clock time, a name); only a run of zeros
/// after a minus sign loses the sign.
pub fn table_line(s: &str) -> Cow<'_, str> {
    let t = text(s);
    if !t.contains("-0") {
        return t;
    }
    let b = t.as_bytes();
    let mut out = String::with_capacity(b.len());
    let mut last = 0;
    let mut i = 0;
    while i < b.len() {
        if b[i] == b'-' && negative_zero_at(b, i) {
            out.push_str(&t[last..i]);
            // Keep right-aligned columns aligned: a space in the sign's place
            // when the number follows a space, else no sign.
            if i > 0 && b[i - 1] == b' ' {
                out.push(' ');
            }
            last = i + 1;
        }
        i += 1;
    }
    out.push_str(&t[last..]);
    Cow::Owned(out)
}

/// Whether the `-` at `i` starts a number written as zero (`-0`, `-0.000`).
fn negative_zero_at(b: &[u8], i: usize) -> bool {
    if i > 0 {
        let p = b[i - 1];
        if p.is_ascii_alphanumeric() || matches!(p, b'.' | b'-' | b'+' | b':' | b'_') {
            return false;
        }
    }
    let mut j = i + 1;
    let start = j;
    while j < b.len() && b[j] == b'0' {
        j += 1;
    }
    if j == start {
        return false;
    }
    if j < b.len() && b[j] == b'.' {
        j += 1;
        let f = j;
        while j < b.len() && b[j] == b'0' {
            j += 1;
        }
        if j == f {
            return false;
        }
    }
    match b.get(j) {
        None => true,
        Some(c) if c.is_ascii_digit() || matches!(c, b'.' | b':' | b'-' | b'/') => false,
        Some(b'e' | b'E') => !b
            .get(j + 1)
            .is_some_and(|c| c.is_ascii_digit() || *c == b'-'),
        Some(_) => true,
    }
}

/// The clock time `HH:MM` of `t` in the zone `tz` (UTC: `chrono::Utc`), of
/// the instant rounded to the whole second as every ISO time in JSON is: an
/// event at 23:52:59.6 is `23:53` in a table as in JSON (`23:53:00Z`).
pub fn clock_hm<Z: chrono::TimeZone>(t: crate::astro::time::Instant, tz: &Z) -> String
where
    Z::Offset: std::fmt::Display,
{
    let mut b = Vec::with_capacity(5);
    push_hm(&mut b, &rounded_utc(t).with_timezone(tz));
    String::from_utf8(b).unwrap_or_default()
}

/// `x` with `dp` decimals, no sign when it rounds to zero; `None` when `x`
/// is not finite.
pub fn fixed(x: f64, dp: usize) -> Option<String> {
    if !x.is_finite() {
        return None;
    }
    let s = format!("{x:.dp$}");
    Some(match s.strip_prefix('-') {
        Some(rest) if rest.bytes().all(|c| c == b'0' || c == b'.') => rest.to_string(),
        _ => s,
    })
}

/// A gain that is never negative (a fall of σd/d per hour), with `dp`
/// decimals; a positive one too small to show at `dp` decimals is written
/// "<0.001" (for `dp` = 3) so that it is not read as none; "—" when not
/// finite.
pub fn small_gain(x: f64, dp: usize) -> String {
    let step = 10f64.powi(-(dp as i32));
    if x > 0.0 && x < 0.5 * step {
        return format!("<{step:.dp$}");
    }
    fixed(x, dp).unwrap_or_else(|| "—".into())
}

/// `x` with `dp` decimals and an explicit sign (`+0.25`, `-1.50`; zero is
/// `+0.00`); `None` when `x` is not finite.
pub fn signed(x: f64, dp: usize) -> Option<String> {
    let s = fixed(x, dp)?;
    Some(if s.starts_with('-') {
        s
    } else {
        format!("+{s}")
    })
}

/// A table cell: `x` with `dp` decimals, or [`MISSING`] when there is no
/// finite value.
pub fn num(x: impl Into<Option<f64>>, dp: usize) -> String {
    x.into()
        .and_then(|x| fixed(x, dp))
        .unwrap_or_else(|| MISSING.into())
}

/// A CSV field for a number: `x` with `dp` decimals, or an empty field when
/// there is no finite value.
pub fn csv_num(x: impl Into<Option<f64>>, dp: usize) -> String {
    x.into().and_then(|x| fixed(x, dp)).unwrap_or_default()
}

/// A CSV field (RFC 4180): quoted when it holds a comma, a quote or a line
/// break, quotes doubled.
pub fn csv_field(s: &str) -> Cow<'_, str> {
    if s.contains([',', '"', '\n', '\r']) {
        Cow::Owned(csv_quoted(s))
    } else {
        Cow::Borrowed(s)
    }
}

/// A CSV field in quotes, its quotes doubled (RFC 4180), whatever it holds.
pub fn csv_quoted(s: &str) -> String {
    format!("\"{}\"", s.replace('"', "\"\""))
}

/// One CSV record with its line end.
pub fn csv_record<S: AsRef<str>>(fields: &[S]) -> String {
    let mut out = String::new();
    for (i, f) in fields.iter().enumerate() {
        if i > 0 {
            out.push(',');
        }
        out.push_str(&csv_field(f.as_ref()));
    }
    out.push('\n');
    out
}

/// A CSV table: a header row and one record per row.
pub fn csv_table<S: AsRef<str>>(header: &[&str], rows: impl IntoIterator<Item = Vec<S>>) -> String {
    let mut out = csv_record(header);
    for r in rows {
        out.push_str(&csv_record(&r));
    }
    out
}

/// A Markdown table cell: [`one_line`] with `|` escaped.
pub fn md_cell(s: &str) -> String {
    one_line(s).replace('|', "\\|")
}

/// A JSON value with every negative zero made zero (non-finite numbers are
/// already `null` in a `serde_json::Value`).
pub fn clean_json(v: &mut serde_json::Value) {
    use serde_json::Value;
    match v {
        Value::Number(n) if n.is_f64() && n.as_f64() == Some(0.0) => {
            *v = serde_json::json!(0.0);
        }
        Value::Array(a) => a.iter_mut().for_each(clean_json),
        Value::Object(o) => o.values_mut().for_each(clean_json),
        _ => {}
    }
}

/// A JSON document as rung prints it: pretty, non-finite numbers as `null`,
/// no negative zero.
pub fn json<T: Serialize + ?Sized>(v: &T) -> crate::Result<String> {
    json_value(to_json_value(v)?)
}

/// [`json`] of a document already made a `serde_json::Value` (not copied
/// into a second one).
pub fn json_value(mut v: serde_json::Value) -> crate::Result<String> {
    clean_json(&mut v);
    serde_json::to_string_pretty(&v)
        .map_err(|e| crate::RungError::invalid("JSON output", e.to_string()))
}

/// `v` as a `serde_json::Value`, the error worded as rung's.
pub fn to_json_value<T: Serialize + ?Sized>(v: &T) -> crate::Result<serde_json::Value> {
    serde_json::to_value(v).map_err(|e| crate::RungError::invalid("JSON output", e.to_string()))
}

/// A list as a JSON array, its elements made values in parallel (the same
/// value as `serde_json::to_value` of the list: the elements in order).
pub fn json_array_par<T: Serialize + Sync>(items: &[T]) -> crate::Result<serde_json::Value> {
    use rayon::prelude::*;
    let a = items
        .par_iter()
        .map(to_json_value)
        .collect::<crate::Result<Vec<_>>>()?;
    Ok(serde_json::Value::Array(a))
}

/// A JSON number or `null` when `x` is not finite (no negative zero).
pub fn json_num(x: f64) -> serde_json::Value {
    if !x.is_finite() {
        serde_json::Value::Null
    } else {
        serde_json::json!(x + 0.0)
    }
}

// The fast path: numbers, times and names straight into byte buffers, for
// outputs of millions of rows (`rung season`), with the same rules.

const DIGITS2: &[u8; 200] = b"0001020304050607080910111213141516171819\
2021222324252627282930313233343536373839\
4041424344454647484950515253545556575859\
6061626364656667686970717273747576777879\
8081828384858687888990919293949596979899";

/// Two decimal digits of `v` (< 100).
pub fn push2(buf: &mut Vec<u8>, v: usize) {
    let i = 2 * (v % 100);
    buf.extend_from_slice(&DIGITS2[i..i + 2]);
}

/// An unsigned integer.
pub fn push_uint(buf: &mut Vec<u8>, mut v: u64) {
    let mut tmp = [0u8; 20];
    let mut i = tmp.len();
    while v >= 100 {
        let d = 2 * (v % 100) as usize;
        v /= 100;
        i -= 2;
        tmp[i..i + 2].copy_from_slice(&DIGITS2[d..d + 2]);
    }
    if v >= 10 {
        let d = 2 * v as usize;
        i -= 2;
        tmp[i..i + 2].copy_from_slice(&DIGITS2[d..d + 2]);
    } else {
        i -= 1;
        tmp[i] = b'0' + v as u8;
    }
    buf.extend_from_slice(&tmp[i..]);
}

/// `v` zero-padded to at least `width` digits.
pub fn push_padded(buf: &mut Vec<u8>, v: u64, width: usize) {
    let mut tmp = [b'0'; 20];
    let mut x = v;
    let mut i = tmp.len();
    while x > 0 {
        i -= 1;
        tmp[i] = b'0' + (x % 10) as u8;
        x /= 10;
    }
    let start = (tmp.len() - width).min(i);
    buf.extend_from_slice(&tmp[start..]);
}

const SCALE: [u64; 5] = [1, 10, 100, 1000, 10_000];

/// A finite number with `dp` (≤ 4) decimals, rounded half away from zero, no
/// sign when it rounds to zero. Returns false (and writes nothing) when `x`
/// is not finite: the caller writes its format's missing value.
pub fn push_fixed(buf: &mut Vec<u8>, x: f64, dp: u32) -> bool {
    if !x.is_finite() {
        return false;
    }
    let dp = dp.min(4) as usize;
    let scale = SCALE[dp];
    let m = (x.abs() * scale as f64 + 0.5) as u64;
    if x < 0.0 && m > 0 {
        buf.push(b'-');
    }
    push_uint(buf, m / scale);
    if dp > 0 {
        buf.push(b'.');
        push_padded(buf, m % scale, dp);
    }
    true
}

/// A number or its format's missing value: `null` in JSON, nothing in CSV.
pub fn push_num(buf: &mut Vec<u8>, x: Option<f64>, dp: u32, json: bool) {
    let done = x.is_some_and(|x| push_fixed(buf, x, dp));
    if !done && json {
        buf.extend_from_slice(b"null");
    }
}

/// UTC ISO 8601 text `YYYY-MM-DDTHH:MM:SSZ` of a Unix time (rounded to the
/// second); days to civil date by the proleptic Gregorian algorithm of
/// H. Hinnant, "chrono-Compatible Low-Level Date Algorithms" (days_from_civil inverse).
pub fn push_iso(buf: &mut Vec<u8>, unix_s: f64) {
    let t = unix_s.round() as i64;
    let days = t.div_euclid(86_400);
    let sod = t.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    push_padded(buf, y.max(0) as u64, 4);
    buf.push(b'-');
    push_padded(buf, m as u64, 2);
    buf.push(b'-');
    push_padded(buf, d as u64, 2);
    buf.push(b'T');
    push_padded(buf, (sod / 3600) as u64, 2);
    buf.push(b':');
    push_padded(buf, (sod / 60 % 60) as u64, 2);
    buf.push(b':');
    push_padded(buf, (sod % 60) as u64, 2);
    buf.push(b'Z');
}

/// An instant as JSON writes it (`Instant::iso`: rounded to the second,
/// `YYYY-MM-DDTHH:MM:SSZ`, a leap second as `:60`), the digits written
/// straight into `buf` instead of through a formatting pattern.
pub fn push_instant(buf: &mut Vec<u8>, t: crate::astro::time::Instant) {
    use chrono::{Datelike, Timelike};
    let dt = rounded_utc(t);
    push_padded(buf, dt.year().max(0) as u64, 4);
    buf.push(b'-');
    push2(buf, dt.month() as usize);
    buf.push(b'-');
    push2(buf, dt.day() as usize);
    buf.push(b'T');
    push2(buf, dt.hour() as usize);
    buf.push(b':');
    push2(buf, dt.minute() as usize);
    buf.push(b':');
    let leap = usize::from(dt.nanosecond() >= 1_000_000_000);
    push2(buf, dt.second() as usize + leap);
    buf.push(b'Z');
}

/// `t` rounded to the whole second as a UTC date-time, as
/// `t.round_to_second().to_datetime()` gives it.
fn rounded_utc(t: crate::astro::time::Instant) -> chrono::DateTime<chrono::Utc> {
    use chrono::Timelike;
    // `Instant::round_to_second` reads the instant to the microsecond, steps
    // back to the whole second (and on by one from half a second), to be
    // read again: the whole second read the first time, plus one second when
    // rounding up, except where the next second may be a leap second (the
    // last second of a UTC day) or the instant is in one: there the long way.
    let dt = t.to_datetime();
    let nanos = dt.nanosecond();
    if nanos >= 1_000_000_000 || (dt.hour(), dt.minute(), dt.second()) == (23, 59, 59) {
        return t.round_to_second().to_datetime();
    }
    let whole = dt - chrono::Duration::nanoseconds(i64::from(nanos));
    if nanos >= 500_000_000 {
        whole + chrono::Duration::seconds(1)
    } else {
        whole
    }
}

/// `HH:MM` of a date-time, as [`clock_hm`] writes it once the instant is
/// rounded and in its zone.
pub fn push_hm<T: chrono::Timelike>(buf: &mut Vec<u8>, t: &T) {
    push2(buf, t.hour() as usize);
    buf.push(b':');
    push2(buf, t.minute() as usize);
}

// JSON written straight into a buffer, the bytes `json` writes for the same
// document (pretty, two-space indent, keys in the order given, which must be
// the sorted order `json` uses; numbers through serde_json's own writer).

/// A JSON string (serde_json's escaping).
pub fn push_json_str(buf: &mut Vec<u8>, s: &str) {
    let _ = serde_json::to_writer(&mut *buf, s);
}

/// A JSON number as [`json`] writes it: `null` when not finite, no negative zero.
pub fn push_json_num(buf: &mut Vec<u8>, x: Option<f64>) {
    match x {
        Some(x) if x.is_finite() => {
            let _ = serde_json::to_writer(&mut *buf, &(x + 0.0));
        }
        _ => buf.extend_from_slice(b"null"),
    }
}

/// A JSON instant (`Instant::iso`) or `null`.
pub fn push_json_instant(buf: &mut Vec<u8>, t: Option<crate::astro::time::Instant>) {
    match t {
        Some(t) => {
            buf.push(b'"');
            push_instant(buf, t);
            buf.push(b'"');
        }
        None => buf.extend_from_slice(b"null"),
    }
}

/// A pretty JSON object or array being written into a buffer at an indent
/// (in levels of two spaces): `{`/`[` on open, each member on its own line,
/// `}`/`]` on its own line at close (`{}`/`[]` when empty).
pub struct JsonNest {
    level: usize,
    members: usize,
    close: u8,
}

impl JsonNest {
    /// Open an object (`{`) at `level`.
    pub fn object(buf: &mut Vec<u8>, level: usize) -> Self {
        buf.push(b'{');
        JsonNest {
            level,
            members: 0,
            close: b'}',
        }
    }

    /// Open an array (`[`) at `level`.
    pub fn array(buf: &mut Vec<u8>, level: usize) -> Self {
        buf.push(b'[');
        JsonNest {
            level,
            members: 0,
            close: b']',
        }
    }

    /// Start the next array element (the caller writes the value).
    pub fn item(&mut self, buf: &mut Vec<u8>) {
        if self.members > 0 {
            buf.push(b',');
        }
        buf.push(b'\n');
        buf.resize(buf.len() + 2 * (self.level + 1), b' ');
        self.members += 1;
    }

    /// Start element `index` (0-based) of an array at `level` in a buffer of
    /// its own, as [`JsonNest::item`] starts it in place: for elements
    /// written apart (on other threads) and joined in order, which the array
    /// then counts with [`JsonNest::add_items`].
    pub fn item_apart(buf: &mut Vec<u8>, level: usize, index: usize) {
        if index > 0 {
            buf.push(b',');
        }
        buf.push(b'\n');
        buf.resize(buf.len() + 2 * (level + 1), b' ');
    }

    /// Count `n` elements written apart ([`JsonNest::item_apart`]).
    pub fn add_items(&mut self, n: usize) {
        self.members += n;
    }

    /// Start the next object member `"key": ` (the caller writes the value).
    pub fn key(&mut self, buf: &mut Vec<u8>, key: &str) {
        self.item(buf);
        push_json_str(buf, key);
        buf.extend_from_slice(b": ");
    }

    /// The level of a value nested in this one.
    pub fn inner(&self) -> usize {
        self.level + 1
    }

    /// Close the object or array.
    pub fn close(self, buf: &mut Vec<u8>) {
        if self.members > 0 {
            buf.push(b'\n');
            buf.resize(buf.len() + 2 * self.level, b' ');
        }
        buf.push(self.close);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_tiny_gain_is_not_written_as_none() {
        assert_eq!(small_gain(2.5e-5, 3), "<0.001");
        assert_eq!(small_gain(0.0, 3), "0.000");
        assert_eq!(small_gain(0.0005, 3), "0.001");
        assert_eq!(small_gain(0.469, 3), "0.469");
        assert_eq!(small_gain(1e-4, 2), "<0.01");
        assert_eq!(small_gain(f64::NAN, 3), "—");
    }

    #[test]
    fn clock_times_are_read_off_the_instant_json_writes() {
        // 23:52:59.6 UTC is written 23:52:59.6 → "23:53:00Z" in JSON, so a
        // table shows 23:53, in UTC and in a zone three hours behind (20:53).
        let t = crate::astro::time::parse_instant("2026-12-01T23:52:59.6Z").unwrap();
        assert_eq!(t.iso(), "2026-12-01T23:53:00Z");
        assert_eq!(clock_hm(t, &chrono::Utc), "23:53");
        let zone = chrono_tz::America::Argentina::Catamarca;
        assert_eq!(clock_hm(t, &zone), "20:53");
        let t = crate::astro::time::parse_instant("2026-12-01T23:52:59.4Z").unwrap();
        assert_eq!(clock_hm(t, &zone), "20:52");
    }

    #[test]
    fn numbers_have_no_negative_zero_and_no_infinity() {
        assert_eq!(fixed(-0.0004, 3).as_deref(), Some("0.000"));
        assert_eq!(fixed(-0.0, 1).as_deref(), Some("0.0"));
        assert_eq!(fixed(-0.4, 0).as_deref(), Some("0"));
        assert_eq!(fixed(-0.006, 2).as_deref(), Some("-0.01"));
        assert_eq!(fixed(f64::INFINITY, 2), None);
        assert_eq!(signed(-0.0001, 2).as_deref(), Some("+0.00"));
        assert_eq!(signed(-1.5, 2).as_deref(), Some("-1.50"));
        assert_eq!(num(f64::NAN, 2), "-");
        assert_eq!(num(None, 2), "-");
        assert_eq!(csv_num(f64::NEG_INFINITY, 2), "");
        assert_eq!(csv_num(-0.0, 3), "0.000");
        let mut v = serde_json::json!({"a": -0.0, "b": [1.5, -0.0], "c": "-0.0"});
        clean_json(&mut v);
        assert_eq!(v.to_string(), r#"{"a":0.0,"b":[1.5,0.0],"c":"-0.0"}"#);
        #[derive(Serialize)]
        struct R {
            x: f64,
            y: f64,
            z: f64,
        }
        let s = json(&R {
            x: f64::INFINITY,
            y: f64::NAN,
            z: -0.0,
        })
        .unwrap();
        assert!(
            !s.contains("inf") && !s.contains("NaN") && !s.contains("-0"),
            "{s}"
        );
        assert!(s.contains("\"x\": null") && s.contains("\"z\": 0.0"), "{s}");
    }

    #[test]
    fn table_lines_lose_the_sign_of_zero_only() {
        assert_eq!(table_line("  P_ra  -0.000 +0.25"), "  P_ra   0.000 +0.25");
        assert_eq!(table_line("x=-0.0%"), "x=0.0%");
        assert_eq!(table_line("-0"), "0");
        // Not numbers written as zero: kept.
        for keep in [
            "2026-01-05",
            "21:30-00:15",
            "-0.01",
            "-0.5",
            "LPO-0",
            "HA -00:30",
            "1e-0",
            "-0.0e5",
            "a-0",
        ] {
            assert_eq!(table_line(keep), keep);
        }
    }

    #[test]
    fn names_cannot_drive_the_terminal() {
        let evil = "LPO\x1b[2J\x1b]0;owned\x07\r\tX\u{202e}gpj.exe\u{9b}";
        let t = text(evil);
        assert!(!t.chars().any(hidden), "{t}");
        assert_eq!(
            t,
            "LPO\\x1b[2J\\x1b]0;owned\\x07\\x0d\\x09X\\u{202e}gpj.exe\\x9b"
        );
        assert_eq!(text("plain name é"), "plain name é");
        assert!(matches!(text("plain"), Cow::Borrowed(_)));
        assert_eq!(text("two\nlines"), "two\nlines");
        assert_eq!(one_line("two\nlines"), "two\\x0alines");
        assert_eq!(md_cell("a|b\x1b"), "a\\|b\\x1b");
    }

    #[test]
    fn csv_fields_are_quoted_as_needed() {
        assert_eq!(
            csv_record(&["a", "b,c", "d\"e", "f\ng"]),
            "a,\"b,c\",\"d\"\"e\",\"f\ng\"\n"
        );
        assert_eq!(
            csv_table(
                &["x", "y"],
                vec![vec!["1".to_string(), csv_num(f64::NAN, 1)]]
            ),
            "x,y\n1,\n"
        );
    }

    #[test]
    fn instants_are_written_as_iso_writes_them() {
        // Around whole and half seconds, across midnight, and on 2016-12-31,
        // whose last minute has a leap second (IERS Bulletin C 52).
        let mut n = 0;
        for base in [
            "2026-12-01T23:52:59Z",
            "2026-12-01T23:59:59Z",
            "2016-12-31T23:59:58Z",
            "2016-12-31T23:59:59Z",
            "2017-01-01T00:00:00Z",
        ] {
            let t0 = crate::astro::time::parse_instant(base).unwrap();
            for k in -40..=80 {
                let t = t0.add_seconds(k as f64 * 0.0371);
                let mut b = Vec::new();
                push_instant(&mut b, t);
                assert_eq!(String::from_utf8(b).unwrap(), t.iso(), "{base} + {k}");
                let hm = t.round_to_second().local(&chrono::Utc).format("%H:%M");
                assert_eq!(clock_hm(t, &chrono::Utc), hm.to_string(), "{base} + {k}");
                n += 1;
            }
        }
        assert_eq!(n, 5 * 121);
    }

    #[test]
    fn fast_path_follows_the_same_rules() {
        let mut b = Vec::new();
        push_fixed(&mut b, 1.23456, 3);
        b.push(b' ');
        push_fixed(&mut b, -0.0004, 3);
        b.push(b' ');
        push_fixed(&mut b, -12.5, 2);
        b.push(b' ');
        push_fixed(&mut b, 0.05, 2);
        b.push(b' ');
        push_num(&mut b, Some(f64::INFINITY), 2, true);
        b.push(b' ');
        push_num(&mut b, None, 2, false);
        b.push(b'|');
        assert_eq!(
            String::from_utf8(b).unwrap(),
            "1.235 0.000 -12.50 0.05 null |"
        );
        // Checked against chrono's calendar (proleptic Gregorian, UTC).
        let dt = chrono::DateTime::parse_from_rfc3339("2026-12-01T23:46:03Z").unwrap();
        let mut b = Vec::new();
        push_iso(&mut b, dt.timestamp() as f64 + 0.2);
        assert_eq!(String::from_utf8(b).unwrap(), "2026-12-01T23:46:03Z");
        for s in [-86_400i64 * 365 * 9, 0, 951_782_400, 4_102_444_799] {
            let want = chrono::DateTime::from_timestamp(s, 0)
                .unwrap()
                .format("%Y-%m-%dT%H:%M:%SZ")
                .to_string();
            let mut b = Vec::new();
            push_iso(&mut b, s as f64);
            assert_eq!(String::from_utf8(b).unwrap(), want);
        }
    }

    /// The straight writer (`JsonNest`, `push_json_*`) gives the bytes
    /// `json` gives for the same document: nesting, empty object and array,
    /// escapes, negative zero and a non-finite number.
    #[test]
    fn json_nest_writes_what_json_writes() {
        let doc = serde_json::json!({
            "a": [1.5, -0.0, null, {"k": "tab\there \"q\""}],
            "b": {},
            "c": [],
            "d": {"x": [{"y": 2.0}], "z": "é"},
        });
        let want = json(&doc).unwrap();
        let mut b = Vec::new();
        let mut o = JsonNest::object(&mut b, 0);
        o.key(&mut b, "a");
        let mut a = JsonNest::array(&mut b, o.inner());
        for x in [Some(1.5), Some(-0.0), Some(f64::NAN)] {
            a.item(&mut b);
            push_json_num(&mut b, x);
        }
        a.item(&mut b);
        let mut k = JsonNest::object(&mut b, a.inner());
        k.key(&mut b, "k");
        push_json_str(&mut b, "tab\there \"q\"");
        k.close(&mut b);
        a.close(&mut b);
        o.key(&mut b, "b");
        JsonNest::object(&mut b, o.inner()).close(&mut b);
        o.key(&mut b, "c");
        JsonNest::array(&mut b, o.inner()).close(&mut b);
        o.key(&mut b, "d");
        let mut d = JsonNest::object(&mut b, o.inner());
        d.key(&mut b, "x");
        let mut x = JsonNest::array(&mut b, d.inner());
        x.item(&mut b);
        let mut y = JsonNest::object(&mut b, x.inner());
        y.key(&mut b, "y");
        push_json_num(&mut b, Some(2.0));
        y.close(&mut b);
        x.close(&mut b);
        d.key(&mut b, "z");
        push_json_str(&mut b, "é");
        d.close(&mut b);
        o.close(&mut b);
        assert_eq!(String::from_utf8(b).unwrap(), want);
    }
}
