//! The bad inputs of docs/bad-input.md's sections "Bounds from physics",
//! "Exposures" and "Sites whose zone contradicts their longitude", with the
//! exact text rung answers (ids as in the table). A value is refused with the
//! same reason whether it comes from a file or an option (`rung::bounds`).

use rung::io::targets::parse_csv;
use std::path::Path;

const MAG: &str = "no star is brighter than about -1.5 mag and no source fainter than about 30 mag has been measured";
const PERIOD: &str = "pulsators with period-luminosity distances run from about 0.02 d (delta Scuti stars) to about 2000 d (long-period variables), and the phase plan's work grows as 1/period";
const AT: [&str; 8] = [
    "--site",
    "pampa-lucero",
    "--ra",
    "60",
    "--dec",
    "-30",
    "--at",
    "2026-12-02T04:00:00Z",
];

/// `rung ARGS` with a user config folder (empty unless `files` are given):
/// (exit code, stdout, stderr).
fn rung_in(args: &[&str], files: &[(&str, &str)]) -> (Option<i32>, String, String) {
    let cfg = tempfile::tempdir().unwrap();
    for (name, text) in files {
        std::fs::write(cfg.path().join(name), text).unwrap();
    }
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("RUNG_CONFIG_DIR", cfg.path())
        .env_remove("RUNG_DEMO_DIR")
        .output()
        .expect("run the rung binary");
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stdout).to_string(),
        String::from_utf8_lossy(&o.stderr).to_string(),
    )
}

/// One line `rung: error: <want>` on stderr and exit code 2.
fn check_cli(id: &str, args: &[&str], files: &[(&str, &str)], want: &str) {
    let (code, _, err) = rung_in(args, files);
    assert_eq!(err, format!("rung: error: {want}\n"), "case {id}");
    assert_eq!(code, Some(2), "case {id}");
}

fn with_at(cmd: &str, extra: &[&str]) -> Vec<String> {
    std::iter::once(cmd)
        .chain(AT)
        .chain(extra.iter().copied())
        .map(str::to_string)
        .collect()
}

fn strs(v: &[String]) -> Vec<&str> {
    v.iter().map(String::as_str).collect()
}

/// The first problem of a CSV text (header + rows) and how many targets loaded.
fn csv_problem(text: &str) -> (String, usize) {
    let l = parse_csv(text, Path::new("t.csv"));
    (
        l.problems
            .first()
            .map(|p| p.to_string())
            .unwrap_or_default(),
        l.targets.len(),
    )
}

const PULSATOR_HEAD: &str =
    "name,ra,dec,kind,period_d,epoch_max_bjd,mean_mag,amplitude_mag,period_err_d\n";

#[test]
fn bounds_on_the_command_line_and_in_files_agree() {
    check_cli(
        "N1",
        &strs(&with_at("snr", &["--mag", "40", "--exptime", "60"])),
        &[],
        &format!("invalid --mag: 40 mag is not within -2..30 mag: {MAG}"),
    );
    let (p, n) = csv_problem("name,ra,dec,mag\nA,10,20,40\nB,10,20,12\n");
    assert_eq!(
        (p.as_str(), n),
        (
            format!("t.csv, line 2, field 'mag': 40 mag is not within -2..30 mag: {MAG}").as_str(),
            1
        ),
        "case N2"
    );
    check_cli(
        "N3",
        &["phase", "--target", "LPO-C05", "--period-d", "1e-6"],
        &[],
        &format!("invalid --period-d: 1e-6 d is not within 0.01..3000 d: {PERIOD}"),
    );
    let (p, n) = csv_problem(&format!(
        "{PULSATOR_HEAD}P,10,20,pulsator,0.000001,2461000.5,12,0.5,\nQ,10,20,pulsator,3.2,2461000.5,12,0.5,\n"
    ));
    assert_eq!(
        (p, n),
        (
            format!("t.csv, line 2, field 'period_d': 1e-6 d is not within 0.01..3000 d: {PERIOD}"),
            1
        ),
        "case N4"
    );
    check_cli(
        "N6",
        &["phase", "--target", "LPO-C05", "--period-err-d", "20"],
        &[],
        "invalid --period-err-d: 20 d is not within 0..9.87 d: an uncertainty is not negative, and one as large as the period (9.87 d) leaves no phase to plan",
    );
    let (p, _) = csv_problem(&format!(
        "{PULSATOR_HEAD}P,10,20,pulsator,3.2,2461000.5,12,12,\n"
    ));
    assert_eq!(
        p,
        "t.csv, line 2, field 'amplitude_mag': 12 mag is not within 0..10 mag: the largest light amplitudes of pulsating stars (long-period variables in V) are about 8 mag",
        "case N7"
    );
    let (p, _) = csv_problem(&format!(
        "{PULSATOR_HEAD}P,10,20,pulsator,3.2,2461000.5,12,0.5,4\n"
    ));
    assert_eq!(
        p,
        "t.csv, line 2, field 'period_err_d': 4 d is not within 0..3.2 d: an uncertainty is not negative, and one as large as the period (3.2 d) leaves no phase to plan",
        "case N7b"
    );
    check_cli(
        "N8",
        &[
            "chase",
            "--ra",
            "50",
            "--dec",
            "-30",
            "--discovered",
            "2026-11-15T04:00:00Z",
            "--now",
            "2026-11-20T00:00:00Z",
            "--redshift",
            "5",
        ],
        &[],
        "invalid --redshift: 5 is not within 0..3: the chase plans thermonuclear supernovae, seen from ground-based telescopes to z of about 2",
    );
    check_cli(
        "N9",
        &strs(&with_at("snr", &["--mag", "15", "--exptime", "1e6"])),
        &[],
        "invalid --exptime: 1e6 s is not within (0, 86400] s: an exposure takes time, and one visit's exposure cannot last longer than a day (86,400 s)",
    );
    check_cli(
        "N10",
        &strs(&with_at("exptime", &["--mag", "15", "--snr", "1e5"])),
        &[],
        "invalid --snr: 100000 is not within (0, 10000]: a signal-to-noise is positive, and beyond 10,000 (0.1 mmag) scintillation and flat fields set the error, not photons",
    );
    check_cli(
        "N12",
        &[
            "parallax",
            "--ra",
            "10",
            "--dec",
            "-20",
            "--parallax-mas",
            "2000",
            "--mag",
            "10",
        ],
        &[],
        "invalid --parallax-mas: 2000 mas is not within (0, 1000] mas: a parallax is positive and the nearest star's is about 770 mas",
    );
}

/// A budget over a file whose pulsator has a period of 1e-6 d used never to
/// finish: the row is refused as it is read, and the rest is planned.
#[test]
fn a_budget_with_a_microsecond_period_refuses_the_row_and_finishes() {
    let d = tempfile::tempdir().unwrap();
    let f = d.path().join("t.csv");
    std::fs::write(
        &f,
        format!("{PULSATOR_HEAD}FAST,06:38:00,-22:48:00,pulsator,0.000001,2461003.18,8.9,0.9,\nSLOW,06:38:00,-22:48:00,pulsator,9.87,2461003.18,8.9,0.9,\n"),
    )
    .unwrap();
    let fs = f.to_string_lossy().to_string();
    let (code, out, err) = rung_in(
        &[
            "budget",
            "--site",
            "pampa-lucero",
            "--targets",
            &fs,
            "--from",
            "2026-12-01",
            "--to",
            "2026-12-20",
            "--goal",
            "12",
        ],
        &[],
    );
    assert_eq!(
        err,
        format!(
            "rung: warning: {fs}, line 2, field 'period_d': 1e-6 d is not within 0.01..3000 d: {PERIOD} (row skipped)\n"
        ),
        "case N5"
    );
    assert_eq!(code, Some(3), "case N5");
    assert!(out.contains("SLOW") && !out.contains("FAST"), "{out}");
}

/// An instruments file with one invented instrument.
fn instrument(name: &str, change: (&str, &str)) -> String {
    let base = rung::photometry::instrument::BUILTIN_INSTRUMENTS;
    let start = base.find("[[instrument]]").unwrap();
    let t = base[start..].replacen("name = \"lucero-1m\"", &format!("name = \"{name}\""), 1);
    assert!(t.contains(change.0), "{}", change.0);
    t.replacen(change.0, change.1, 1)
}

#[test]
fn exposures_out_of_reach_are_refused_with_the_reason() {
    check_cli(
        "X1",
        &strs(&with_at("exptime", &["--mag", "30", "--snr", "1000"])),
        &[],
        "invalid exposure: a V = 30 star at SNR 1000 needs 1.06e9 h of exposure with lucero-1m, more than one visit may hold (24 h)",
    );
    let fast = instrument(
        "fast-shutter",
        ("min_exptime_s = 1.0", "min_exptime_s = 0.001"),
    );
    check_cli(
        "X2",
        &strs(&with_at(
            "exptime",
            &[
                "--instrument",
                "fast-shutter",
                "--mag",
                "-1.5",
                "--snr",
                "3000",
            ],
        )),
        &[("instruments.toml", &fast)],
        "invalid exposure: a V = -1.5 star at SNR 3000 with fast-shutter: it needs 36188 sub-exposures, more than the 10000 one visit may hold (each readout costs time, and the shutter has a shortest exposure)",
    );
    check_cli(
        "X3",
        &strs(&with_at("snr", &["--mag", "15", "--exptime", "0.5"])),
        &[],
        "invalid exposure time: 0.5 s is shorter than the shortest exposure of lucero-1m (1 s)",
    );
    let big = instrument("huge", ("aperture_m = 1.0", "aperture_m = 100.0"));
    let (code, _, err) = rung_in(
        &strs(&with_at(
            "snr",
            &["--instrument", "huge", "--mag", "15", "--exptime", "60"],
        )),
        &[("instruments.toml", &big)],
    );
    assert_eq!(code, Some(2), "case N11");
    assert!(
        err.starts_with("rung: error: ")
            && err.ends_with("instruments.toml, line 4, field 'aperture_m': instrument huge: 100 m is not within 0.01..50 m: from a 1 cm lens to beyond the largest telescope being built (39 m)\n"),
        "case N11: {err}"
    );
}

#[test]
fn the_exposure_search_answers_what_it_used_to_get_wrong() {
    // X4: the goal lies between one and two of the shortest exposures and one
    // exposure would pass the full well: two of the shortest, unsaturated.
    let (code, out, err) = rung_in(
        &strs(&with_at("exptime", &["--mag", "9", "--snr", "600"])),
        &[],
    );
    assert_eq!(code, Some(0), "{err}");
    assert!(
        out.contains("  exposure 2.0 s in 2 × 1.0 s;"),
        "case X4: {out}"
    );
    assert!(
        out.contains("  peak pixel 55834 e⁻ of 85196 e⁻ (not saturated);"),
        "case X4: {out}"
    );
    // X5: no detection is said so, not as a magnitude error of thousands of mag.
    let (code, out, _) = rung_in(
        &strs(&with_at("snr", &["--mag", "30", "--exptime", "1"])),
        &[],
    );
    assert_eq!(code, Some(0));
    assert!(
        out.contains("  SNR 0.00  (no detection: the noise exceeds the signal)\n"),
        "case X5: {out}"
    );
}

/// Two event times (ISO text or null) within the events' 1 s tolerance (the
/// nights start at different instants, so the bisections differ by a second).
fn same_time(a: &serde_json::Value, b: &serde_json::Value, what: &str) {
    let t = |v: &serde_json::Value| {
        v.as_str()
            .map(|s| chrono::DateTime::parse_from_rfc3339(s).unwrap().timestamp())
    };
    match (t(a), t(b)) {
        (Some(x), Some(y)) => assert!((x - y).abs() <= 2, "case Z1: {what}: {a} {b}"),
        (x, y) => assert_eq!(x, y, "case Z1: {what}"),
    }
}

const ZONE_WARNING: &str = "rung: warning: site inline: the zone UTC runs 10.4 h ahead of the mean solar time of longitude -155.47° (UTC-10:22); its nights are taken from mean solar noon to noon, so that dusk and dawn fall in one night, and times are shown in UTC as given\n";

/// The site of the issue, at -155.47° with the zone UTC: warned, and its
/// night is the same night, to the second, as with the zone of its longitude
/// (dusk and dawn both there, every window inside the night).
#[test]
fn a_zone_that_contradicts_the_longitude_is_warned_and_its_night_makes_sense() {
    let night = |zone: &str| {
        rung_in(
            &[
                "night",
                "--site",
                &format!("19.82,-155.47,4200,{zone}"),
                "--date",
                "2026-12-01",
                "--targets",
                "targets-demo/targets.csv",
                "--json",
            ],
            &[],
        )
    };
    let (code, utc, err) = night("UTC");
    assert_eq!(code, Some(0));
    assert_eq!(err, ZONE_WARNING, "case Z1");
    let (code, local, err) = night("Etc/GMT+10");
    assert_eq!(code, Some(0));
    assert_eq!(err, "", "a zone near the longitude is not warned");
    let a: serde_json::Value = serde_json::from_str(&utc).unwrap();
    let b: serde_json::Value = serde_json::from_str(&local).unwrap();
    for k in [
        "sunset",
        "sunrise",
        "civil_dusk",
        "civil_dawn",
        "nautical_dusk",
        "nautical_dawn",
        "astronomical_dusk",
        "astronomical_dawn",
    ] {
        assert!(a[k].is_string(), "case Z1: {k} missing: {a}");
        same_time(&a[k], &b[k], k);
    }
    let (ta, tb) = (
        a["targets"].as_array().unwrap(),
        b["targets"].as_array().unwrap(),
    );
    assert_eq!(ta.len(), tb.len());
    for (x, y) in ta.iter().zip(tb) {
        for k in ["window_start", "window_end", "transit"] {
            same_time(&x[k], &y[k], k);
        }
        let (hx, hy) = (
            x["observable_hours"].as_f64(),
            y["observable_hours"].as_f64(),
        );
        assert!(
            (hx.unwrap() - hy.unwrap()).abs() < 2.0 / 3600.0,
            "case Z1: {x} {y}"
        );
    }
    // The table is the same night, in UTC: dusk and dawn are both there.
    let (_, table, _) = rung_in(
        &[
            "night",
            "--site",
            "19.82,-155.47,4200,UTC",
            "--date",
            "2026-12-01",
        ],
        &[],
    );
    assert!(
        table.contains("  sunset           03:41   03:41   sunrise          16:41   16:41\n"),
        "case Z1: {table}"
    );
}

#[test]
fn zones_that_civil_time_really_uses_are_not_warned() {
    use rung::io::sites::resolve;
    // The far west of a country on one zone (quoted from memory: China spans
    // about 73°E to 135°E on UTC+8; Spain's west lies near 9°W on UTC+1/+2).
    for spec in [
        "39.5,73.6,1300,Asia/Shanghai",
        "42.9,-9.3,100,Europe/Madrid",
        "-27.45,-68.02,3120,America/Argentina/Catamarca",
        "0,-157.5,0,Pacific/Kiritimati",
        "19.82,-155.47,4200",
    ] {
        let s = resolve(spec).unwrap();
        assert!(s.zone_warning().is_none(), "{spec}: {:?}", s.zone_warning());
    }
    assert!(
        resolve("19.82,-155.47,4200,UTC")
            .unwrap()
            .zone_warning()
            .is_some()
    );
    assert!(
        resolve("51.5,0,0,Asia/Tokyo")
            .unwrap()
            .zone_warning()
            .is_some()
    );
}
