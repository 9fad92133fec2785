//! Exports of a plan: CSV rows, an iCalendar (RFC 5545) file with one event
//! per visit in the site's time zone, and a printable night sheet.

use crate::astro::site::Site;
use crate::astro::time::Instant;
use crate::output::{csv_num, csv_table, md_cell, num};
use crate::plan::schedule::{Status, Visit};
use chrono::{NaiveDate, Offset, TimeZone, Utc};
use chrono_tz::{OffsetComponents, Tz};

/// CSV of visits with a header row; times in UTC ISO 8601 and local; a
/// number without a value is an empty field. `exposures` spells every
/// band's frames and exposure (`B 1 × 3 s, V 1 × 4 s`), as the night sheet
/// and the calendar do; `n_exposures` and `exptime_per_frame_s` are the
/// totals and the first band's.
pub fn visits_csv(visits: &[Visit], site: &Site) -> String {
    csv_table(
        &[
            "id",
            "target",
            "kind",
            "night",
            "start_utc",
            "end_utc",
            "start_local",
            "end_local",
            "exptime_s",
            "n_exposures",
            "snr",
            "airmass",
            "status",
            "cautions",
            "ra_deg",
            "dec_deg",
            "ra_hms",
            "dec_dms",
            "bands",
            "exptime_per_frame_s",
            "observed_utc",
            "seeing_arcsec",
            "comment",
            "exposures",
            "snr_measured",
        ],
        visits.iter().map(|v| {
            vec![
                v.id.clone(),
                v.target.clone(),
                v.kind.as_str().to_string(),
                v.night.to_string(),
                v.start.iso(),
                v.end.iso(),
                local_iso(v.start, &site.timezone),
                local_iso(v.end, &site.timezone),
                csv_num(v.exptime_s, 1),
                v.n_exposures.to_string(),
                csv_num(v.snr, 1),
                csv_num(v.airmass, 3),
                v.status.as_str().to_string(),
                v.cautions.join(" | "),
                csv_num(v.ra_deg, 6),
                csv_num(v.dec_deg, 6),
                v.ra_deg.map(ra_hms).unwrap_or_default(),
                v.dec_deg.map(dec_dms).unwrap_or_default(),
                bands(v),
                csv_num(per_frame_s(v), 1),
                v.observed.map(|t| t.iso()).unwrap_or_default(),
                csv_num(v.seeing_arcsec, 2),
                v.comment.clone().unwrap_or_default(),
                exposure_text(v),
                v.snr_measured
                    .iter()
                    .map(|(b, s)| format!("{b}={}", csv_num(*s, 1)))
                    .collect::<Vec<_>>()
                    .join(";"),
            ]
        }),
    )
}

/// Right ascension as hours, minutes and seconds to 0.1 s (`05:34:31.9`).
pub fn ra_hms(ra_deg: f64) -> String {
    let t = (ra_deg.rem_euclid(360.0) / 15.0 * 36_000.0).round() as i64 % 864_000;
    format!(
        "{:02}:{:02}:{:02}.{}",
        t / 36_000,
        t / 600 % 60,
        t / 10 % 60,
        t % 10
    )
}

/// Declination as signed degrees, arcminutes and arcseconds to 1″ (`-22:00:52`).
pub fn dec_dms(dec_deg: f64) -> String {
    let sign = if dec_deg < 0.0 { '-' } else { '+' };
    let t = (dec_deg.abs() * 3600.0).round() as i64;
    format!("{sign}{:02}:{:02}:{:02}", t / 3600, t / 60 % 60, t % 60)
}

/// The bands of a visit in the order taken (`BVR`), or `-` when the plan
/// file did not record them.
pub fn bands(v: &Visit) -> String {
    if v.exposures.is_empty() {
        return "-".into();
    }
    v.exposures
        .iter()
        .map(|b| b.band.as_str())
        .collect::<Vec<_>>()
        .join(" ")
}

/// The exposure of one frame of the visit's primary band, seconds.
pub fn per_frame_s(v: &Visit) -> f64 {
    match v.exposures.first() {
        Some(b) => b.exptime_s / b.n_exposures.max(1) as f64,
        None => v.exptime_s / v.n_exposures.max(1) as f64,
    }
}

/// What to take, band by band: `B 3 × 30 s, V 3 × 20 s` (or the totals
/// when the bands were not recorded).
pub fn exposure_text(v: &Visit) -> String {
    if v.exposures.is_empty() {
        return format!(
            "{} × {} s",
            v.n_exposures,
            num(v.exptime_s / v.n_exposures.max(1) as f64, 0)
        );
    }
    v.exposures
        .iter()
        .map(|b| {
            format!(
                "{} {} × {} s",
                b.band,
                b.n_exposures,
                num(b.exptime_s / b.n_exposures.max(1) as f64, 0)
            )
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// A visit's signal-to-noise as the sheet and the calendar show it: the
/// expected one, and for a done visit the measured one(s) the methods take
/// ([`Visit::epoch`]) beside the expected of the same bands: "62 measured
/// (80 expected)", "B 55, V 70 measured (B 60, V 80 expected)".
pub fn snr_text(v: &Visit) -> String {
    let Some(measured) = v.measured_text() else {
        return num(v.snr, 0);
    };
    let expected = if !v.measured_primary_only() {
        v.snr_measured
            .keys()
            .map(|b| {
                let e = v.exposures.iter().find(|x| &x.band == b).map(|x| x.snr);
                format!("{b} {}", num(e, 0))
            })
            .collect::<Vec<_>>()
            .join(", ")
    } else {
        num(v.snr, 0)
    };
    format!("{measured} measured ({expected} expected)")
}

fn place_text(v: &Visit) -> String {
    match (v.ra_deg, v.dec_deg) {
        (Some(r), Some(d)) => format!("{} {}", ra_hms(r), dec_dms(d)),
        _ => "-".into(),
    }
}

/// Local ISO 8601 time with its offset, to the second.
pub fn local_iso(t: Instant, tz: &Tz) -> String {
    t.round_to_second()
        .local(tz)
        .format("%Y-%m-%dT%H:%M:%S%:z")
        .to_string()
}

/// Escape a TEXT value (RFC 5545 §3.3.11).
fn ics_text(s: &str) -> String {
    s.replace('\\', "\\\\")
        .replace(';', "\\;")
        .replace(',', "\\,")
        .replace('\n', "\\n")
}

/// Fold a content line at 75 octets (RFC 5545 §3.1), never inside a UTF-8 character.
fn fold(line: &str) -> String {
    let mut out = String::new();
    let mut count = 0;
    for ch in line.chars() {
        let n = ch.len_utf8();
        if count + n > 75 {
            out.push_str("\r\n ");
            count = 1;
        }
        out.push(ch);
        count += n;
    }
    out.push_str("\r\n");
    out
}

fn utc_stamp(t: Instant) -> String {
    t.round_to_second()
        .to_datetime()
        .format("%Y%m%dT%H%M%SZ")
        .to_string()
}

fn local_stamp(t: Instant, tz: &Tz) -> String {
    t.round_to_second()
        .local(tz)
        .format("%Y%m%dT%H%M%S")
        .to_string()
}

fn offset_text(secs: i32) -> String {
    let sign = if secs < 0 { '-' } else { '+' };
    let a = secs.abs();
    if a % 60 != 0 {
        format!("{sign}{:02}{:02}{:02}", a / 3600, (a % 3600) / 60, a % 60)
    } else {
        format!("{sign}{:02}{:02}", a / 3600, (a % 3600) / 60)
    }
}

/// The zone's UTC-offset changes between two instants (Unix seconds), found by
/// hourly steps and bisection to the second: (Unix second of the change, offset before, offset after, dst after, abbreviation after).
fn transitions(tz: &Tz, from_s: i64, to_s: i64) -> Vec<(i64, i32, i32, bool, String)> {
    let off = |s: i64| -> (i32, bool, String) {
        let dt = Utc
            .timestamp_opt(s, 0)
            .single()
            .unwrap_or_default()
            .with_timezone(tz);
        let o = dt.offset();
        (
            o.fix().local_minus_utc(),
            o.dst_offset().num_seconds() != 0,
            dt.format("%Z").to_string(),
        )
    };
    let mut out = Vec::new();
    let mut s = from_s;
    let mut prev = off(s);
    while s < to_s {
        let n = (s + 3600).min(to_s);
        let cur = off(n);
        if cur.0 != prev.0 {
            let (mut lo, mut hi) = (s, n);
            while hi - lo > 1 {
                let mid = (lo + hi) / 2;
                if off(mid).0 == prev.0 {
                    lo = mid
                } else {
                    hi = mid
                }
            }
            out.push((hi, prev.0, cur.0, cur.1, cur.2.clone()));
        }
        prev = cur;
        s = n;
    }
    out
}

/// A VTIMEZONE for `tz` covering `[from, to]` (RFC 5545 §3.6.5): one
/// observance per offset change inside the span, or a single fixed observance.
pub fn vtimezone(tz: &Tz, from: Instant, to: Instant) -> String {
    let f = from.to_datetime().timestamp() - 40 * 86_400;
    let t = to.to_datetime().timestamp() + 40 * 86_400;
    let mut s = String::new();
    s.push_str(&fold("BEGIN:VTIMEZONE"));
    s.push_str(&fold(&format!("TZID:{}", tz.name())));
    let start_dt = Utc
        .timestamp_opt(f, 0)
        .single()
        .unwrap_or_default()
        .with_timezone(tz);
    let o0 = start_dt.offset();
    let first_off = o0.fix().local_minus_utc();
    let first_dst = o0.dst_offset().num_seconds() != 0;
    let first_name = start_dt.format("%Z").to_string();
    let obs =
        |s: &mut String, kind: &str, local_start: String, from_o: i32, to_o: i32, name: &str| {
            s.push_str(&fold(&format!("BEGIN:{kind}")));
            s.push_str(&fold(&format!("DTSTART:{local_start}")));
            s.push_str(&fold(&format!("TZOFFSETFROM:{}", offset_text(from_o))));
            s.push_str(&fold(&format!("TZOFFSETTO:{}", offset_text(to_o))));
            s.push_str(&fold(&format!("TZNAME:{}", ics_text(name))));
            s.push_str(&fold(&format!("END:{kind}")));
        };
    // The offset in force at the start of the span.
    let local0 = (Utc.timestamp_opt(f, 0).single().unwrap_or_default()
        + chrono::Duration::seconds(first_off as i64))
    .format("%Y%m%dT%H%M%S")
    .to_string();
    obs(
        &mut s,
        if first_dst { "DAYLIGHT" } else { "STANDARD" },
        local0,
        first_off,
        first_off,
        &first_name,
    );
    for (at, before, after, dst, name) in transitions(tz, f, t) {
        // DTSTART of an observance is local time in the offset before the change.
        let local = (Utc.timestamp_opt(at, 0).single().unwrap_or_default()
            + chrono::Duration::seconds(before as i64))
        .format("%Y%m%dT%H%M%S")
        .to_string();
        obs(
            &mut s,
            if dst { "DAYLIGHT" } else { "STANDARD" },
            local,
            before,
            after,
            &name,
        );
    }
    s.push_str(&fold("END:VTIMEZONE"));
    s
}

/// An iCalendar file with one VEVENT per visit, DTSTART/DTEND in the site's zone:
/// the visit's [`Visit::span`] (a done visit where it was observed, its
/// planned time then in the description). `stamp` is the DTSTAMP of every
/// event (the plan's creation time, for reproducible files).
pub fn ics(visits: &[Visit], site: &Site, stamp: Instant) -> String {
    let tz = &site.timezone;
    let mut s = String::new();
    s.push_str(&fold("BEGIN:VCALENDAR"));
    s.push_str(&fold("VERSION:2.0"));
    s.push_str(&fold("PRODID:-//rung//observing plan//EN"));
    s.push_str(&fold("CALSCALE:GREGORIAN"));
    if let (Some(a), Some(b)) = (
        visits
            .iter()
            .map(|v| v.span().0)
            .reduce(|a, b| if b < a { b } else { a }),
        visits
            .iter()
            .map(|v| v.span().1)
            .reduce(|a, b| if b > a { b } else { a }),
    ) {
        s.push_str(&vtimezone(tz, a, b));
    }
    for v in visits {
        let (start, end) = v.span();
        s.push_str(&fold("BEGIN:VEVENT"));
        s.push_str(&fold(&format!(
            "UID:{}@rung",
            ics_text(&v.id.replace(' ', "_"))
        )));
        s.push_str(&fold(&format!("DTSTAMP:{}", utc_stamp(stamp))));
        s.push_str(&fold(&format!(
            "DTSTART;TZID={}:{}",
            tz.name(),
            local_stamp(start, tz)
        )));
        s.push_str(&fold(&format!(
            "DTEND;TZID={}:{}",
            tz.name(),
            local_stamp(end, tz)
        )));
        s.push_str(&fold(&format!(
            "SUMMARY:{}",
            ics_text(&format!(
                "{} ({}) {:.0} s [{}]",
                v.target,
                v.kind.as_str(),
                v.exptime_s,
                v.id
            ))
        )));
        let mut d = format!(
            "Visit {}. RA/Dec (ICRS) {}. {}; SNR {}, airmass {:.2}; UTC {} to {}; {}.",
            v.id,
            place_text(v),
            exposure_text(v),
            snr_text(v),
            v.airmass,
            start.iso(),
            end.iso(),
            v.status_words()
        );
        if start != v.start {
            d.push_str(&format!(
                " Observed at that time; planned for UTC {} to {}.",
                v.start.iso(),
                v.end.iso()
            ));
        }
        for c in &v.cautions {
            d.push(' ');
            d.push_str(c);
        }
        s.push_str(&fold(&format!("DESCRIPTION:{}", ics_text(&d))));
        s.push_str(&fold(&format!("LOCATION:{}", ics_text(&site.name))));
        if v.status == Status::Lost {
            s.push_str(&fold("STATUS:CANCELLED"));
        } else {
            s.push_str(&fold("STATUS:CONFIRMED"));
        }
        s.push_str(&fold("END:VEVENT"));
    }
    s.push_str(&fold("END:VCALENDAR"));
    s
}

/// A printable night sheet (Markdown) for one night: times in UTC and local,
/// target, exposure, airmass, cautions.
pub fn night_sheet(visits: &[Visit], site: &Site, night: NaiveDate, header: &str) -> String {
    let tz = &site.timezone;
    let mut s = format!("# Night sheet {night} at {}\n\n{header}\n\n", site.name);
    s.push_str(&format!("Times are UTC and local ({}).\n\n", tz.name()));
    s.push_str("| start UTC | start local | end local | visit | target | kind | RA (ICRS) | Dec (ICRS) | exposure (band frames × s) | SNR | airmass | status | cautions |\n");
    s.push_str("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |\n");
    let mut any = false;
    // In the order of the times shown (a done visit where it was observed,
    // on the night it was observed in: Visit::held_night).
    let mut on: Vec<&Visit> = visits
        .iter()
        .filter(|v| v.held_night(site) == night)
        .collect();
    on.sort_by(|a, b| Visit::by_span_start(a, b));
    let cautioned = on.iter().any(|v| !v.cautions.is_empty());
    for v in on {
        any = true;
        let hm = |t: Instant| t.round_to_second().local(tz).format("%H:%M:%S").to_string();
        // A done visit where it was observed (Visit::span).
        let (start, end) = v.span();
        s.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |\n",
            start.round_to_second().to_datetime().format("%H:%M:%S"),
            hm(start),
            hm(end),
            md_cell(&v.id),
            md_cell(&v.target),
            v.kind.as_str(),
            v.ra_deg.map(ra_hms).unwrap_or_else(|| "–".into()),
            v.dec_deg.map(dec_dms).unwrap_or_else(|| "–".into()),
            md_cell(&exposure_text(v)),
            snr_text(v),
            num(v.airmass, 2),
            md_cell(&v.status_words()),
            md_cell(&v.cautions.join("; ")),
        ));
    }
    if !any {
        s.push_str("| – | – | – | – | no visits this night | | | | | | | | |\n");
    }
    if cautioned {
        s.push_str(
            "\n**SUN CAUTION** on some visits: the observatory's own safety rules prevail.\n",
        );
    }
    s
}
