//! `rung season --summary` streams its targets: the peak memory of a run over
//! 300,000 targets stays far below what holding every target costs (about
//! 1 KB a target before the summary streamed: 1.09 GB for a million).
//!
//! One test, one child process in this test binary, so that the children's
//! peak resident size the system reports (`getrusage(RUSAGE_CHILDREN)`) is
//! that run's alone. The README's figure (a million targets × 3 nights) is
//! measured with `/usr/bin/time -v`; this test only guards the bound.

use std::io::Write;

#[cfg(target_os = "linux")]
#[test]
fn season_summary_memory_does_not_grow_with_targets_held() {
    const N: usize = 300_000;
    let d = tempfile::tempdir().unwrap();
    let f = d.path().join("many.csv");
    {
        let mut w = std::io::BufWriter::new(std::fs::File::create(&f).unwrap());
        writeln!(w, "name,ra,dec").unwrap();
        for i in 0..N {
            let ra = (i as f64 * 0.0012) % 360.0;
            let dec = ((i % 1789) as f64 / 1789.0) * 150.0 - 85.0;
            writeln!(w, "S{i:07},{ra:.5},{dec:.5}").unwrap();
        }
    }
    let cfg = tempfile::tempdir().unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_rung"))
        .args(["season", "--site", "pampa-lucero", "--targets"])
        .arg(&f)
        .args([
            "--from",
            "2026-12-01",
            "--to",
            "2026-12-03",
            "--summary",
            "--csv",
        ])
        .env("RUNG_CONFIG_DIR", cfg.path())
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = String::from_utf8(o.stdout).unwrap();
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines.len(), N + 1);
    assert!(lines[1].starts_with("S0000000,"));
    assert!(lines[N].starts_with(&format!("S{:07},", N - 1)));
    // Some targets are up in these nights, in every chunk of the scan.
    let up = |part: &[&str]| part.iter().filter(|l| !l.contains(",0.000,0,")).count();
    assert!(up(&lines[1..1000]) > 0 && up(&lines[N - 1000..]) > 0);

    // SAFETY: getrusage fills the struct it is given.
    let mut ru: libc::rusage = unsafe { std::mem::zeroed() };
    assert_eq!(
        unsafe { libc::getrusage(libc::RUSAGE_CHILDREN, &mut ru) },
        0
    );
    let peak_mb = ru.ru_maxrss as f64 / 1024.0; // kB on Linux
    eprintln!("season --summary over {N} targets × 3 nights: peak {peak_mb:.1} MB");
    // Holding every target took about 300 MB here; the stream takes about 45.
    assert!(peak_mb < 120.0, "peak {peak_mb:.1} MB");
}
