//! Synthetic invented programmes for the programme-scale benchmarks: `n`
//! targets in the demo programme's proportions (6 parallax targets, 6
//! pulsators and 1 transient in every 13), spread evenly in right ascension
//! and over the declinations a southern site at −27° can reach (−80° to
//! +35°), with parameters in the demo's ranges. Every name, place and
//! parameter is made up. `benches/side_by_side.py --programme` writes the
//! same rows (its `synthetic_programme`), so the criterion figures and the
//! command-line runs are for one workload.

/// The CSV text of a synthetic programme of `n` targets (the demo's columns).
pub fn csv(n: usize) -> String {
    let mut s = String::from(
        "# synthetic invented programme (benches/support/synthetic.rs)\n\
         name,kind,ra,dec,parallax_mas,pm_ra_masyr,pm_dec_masyr,mag,band,period_d,epoch_max_bjd,period_err_d,amplitude_mag,mean_mag,discovered,peak_mag,mag_now,redshift,extinction_mag,goal_pct,priority,notes\n",
    );
    let golden = 180.0 * (3.0 - 5f64.sqrt());
    let (s_lo, s_hi) = ((-80f64).to_radians().sin(), 35f64.to_radians().sin());
    for i in 0..n {
        let ra = (golden * i as f64).rem_euclid(360.0);
        let z = s_lo + (s_hi - s_lo) * (i as f64 + 0.5) / n as f64;
        let dec = z.asin().to_degrees();
        let name = format!("SYN-{i:05}");
        let row = match i % 13 {
            0..=5 => format!(
                "{name},parallax,{ra:.5},{dec:.5},{},{},{},{:.1},{},,,,,,,,,,,{},1,synthetic (invented)",
                15 + (i * 37) % 86,
                100 + (i * 53) % 400,
                -200 + ((i * 29) % 400) as i64,
                12.0 + ((i * 7) % 61) as f64 / 10.0,
                if i % 2 == 0 { "R" } else { "I" },
                if i % 3 == 0 { 5 } else { 3 },
            ),
            6..=11 => {
                let period = 2.0 * 30f64.powf((i as f64 * 0.618_034).fract());
                format!(
                    "{name},pulsator,{ra:.5},{dec:.5},,,,,V,{period:.4},{:.4},{:.6},{:.1},{:.1},,,,,{:.2},{},1,synthetic (invented)",
                    2_461_000.0 + (i as f64 * 0.37) % period,
                    period * 2e-5,
                    0.4 + (i % 6) as f64 / 10.0,
                    8.0 + ((i * 11) % 51) as f64 / 10.0,
                    0.1 + (i % 9) as f64 / 10.0,
                    if i % 4 == 0 { 12 } else { 3 },
                )
            }
            _ => format!(
                "{name},transient,{ra:.5},{dec:.5},,,,,B,,,,,,2026-11-{:02}T06:00:00Z,{:.1},,{:.3},0.05,8,2,synthetic (invented)",
                20 + i % 10,
                15.5 + (i % 25) as f64 / 10.0,
                0.01 + (i % 40) as f64 / 1000.0,
            ),
        };
        s.push_str(&row);
        s.push('\n');
    }
    s
}

/// The targets of [`csv`]`(n)`, read by rung's own targets reader.
pub fn targets(n: usize) -> Vec<rung::io::targets::Target> {
    let dir = std::env::temp_dir().join(format!("rung-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("bench folder");
    let path = dir.join(format!("synthetic-{n}.csv"));
    std::fs::write(&path, csv(n)).expect("write the synthetic programme");
    let l = rung::io::targets::load(&path).expect("synthetic programme");
    assert!(l.problems.is_empty(), "refused rows: {:?}", l.problems);
    let _ = std::fs::remove_file(&path);
    l.targets
}
