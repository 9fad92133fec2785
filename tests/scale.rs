//! Scale: a targets file of a million rows streams with bounded memory and
//! reports its progress; a row with 10 MB in one field is refused without
//! being read into memory, and the rows around it still load.

use rung::io::targets::{MAX_FIELD_BYTES, MAX_LINE_BYTES, Target, load, stream_csv_progress};
use std::io::Write;
use std::path::Path;
use std::sync::Mutex;

/// The tests of this file run one at a time, so that the peak memory one of
/// them reads from /proc is its own.
static ONE_AT_A_TIME: Mutex<()> = Mutex::new(());

/// (VmHWM, VmRSS) of this process in kB, from /proc/self/status (Linux).
fn mem_kb() -> Option<(u64, u64)> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let get = |k: &str| {
        s.lines()
            .find(|l| l.starts_with(k))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|v| v.parse::<u64>().ok())
    };
    Some((get("VmHWM:")?, get("VmRSS:")?))
}

/// Reset the peak-RSS counter (Linux ≥ 4.0: writing 5 to clear_refs).
fn reset_peak() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

fn write_rows(path: &Path, rows: usize) -> u64 {
    let f = std::fs::File::create(path).unwrap();
    let mut w = std::io::BufWriter::new(f);
    writeln!(w, "name,ra,dec,kind,mag").unwrap();
    for i in 0..rows {
        let ra = (i as f64 * 0.000_36) % 360.0;
        let dec = ((i % 1789) as f64 / 1789.0) * 180.0 - 90.0;
        writeln!(
            w,
            "S{i:07},{ra:.5},{dec:.5},plain,{:.1}",
            8.0 + (i % 100) as f64 / 10.0
        )
        .unwrap();
    }
    w.flush().unwrap();
    std::fs::metadata(path).unwrap().len()
}

#[test]
fn a_million_rows_stream_with_bounded_memory_and_progress() {
    let _one = ONE_AT_A_TIME.lock().unwrap();
    const ROWS: usize = 1_000_000;
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("big.csv");
    let size = write_rows(&path, ROWS);
    let measured = reset_peak();
    let before = mem_kb();
    let mut n = 0usize;
    let mut last: Option<Target> = None;
    let mut problems = Vec::new();
    let mut progress: Vec<(u64, u64)> = Vec::new();
    stream_csv_progress(
        &path,
        &mut |t| {
            n += 1;
            last = Some(t);
        },
        &mut |p| problems.push(p.to_string()),
        &mut |w| panic!("no warning expected: {w}"),
        &mut |read, total| progress.push((read, total)),
    )
    .unwrap();
    let after = mem_kb();
    assert_eq!(n, ROWS, "{problems:?}");
    assert!(
        problems.is_empty(),
        "{:?}",
        &problems[..problems.len().min(3)]
    );
    assert_eq!(last.unwrap().name, format!("S{:07}", ROWS - 1));
    // Progress: about every MiB, never backwards, ending at the whole file.
    assert!(
        progress.len() as u64 >= size / (2 << 20),
        "{} calls",
        progress.len()
    );
    assert!(progress.windows(2).all(|w| w[0].0 <= w[1].0));
    assert!(progress.iter().all(|(r, t)| *t == size && r <= t));
    assert_eq!(*progress.last().unwrap(), (size, size));
    // Memory: the file text (~40 MB) is never held; what grows is the set of
    // names kept for the duplicate check (about 70 bytes a name). Reading the
    // whole text and keeping every Target, as a naive loader would, costs
    // several hundred MB here.
    if let (true, Some((_, rss0)), Some((hwm1, _))) = (measured, before, after) {
        let grown_mb = (hwm1.saturating_sub(rss0)) as f64 / 1024.0;
        eprintln!(
            "file {:.1} MB, peak memory grew by {grown_mb:.1} MB",
            size as f64 / 1e6
        );
        assert!(grown_mb < 150.0, "peak memory grew by {grown_mb:.1} MB");
    }
}

#[test]
fn ten_megabytes_in_one_field_is_refused_and_neighbours_load() {
    let _one = ONE_AT_A_TIME.lock().unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("huge-field.csv");
    {
        let mut w = std::io::BufWriter::new(std::fs::File::create(&path).unwrap());
        w.write_all(b"name,ra,dec,notes\nbefore,10,20,fine\nhuge,11,21,\"")
            .unwrap();
        let chunk = vec![b'x'; 64 * 1024];
        for _ in 0..160 {
            w.write_all(&chunk).unwrap(); // 10 MiB in one quoted field
        }
        w.write_all(b"\"\nafter,12,22,\"also fine, with a comma\"\n")
            .unwrap();
        // And one just over the field limit, but short enough to be read:
        let long = "y".repeat(MAX_FIELD_BYTES + 1);
        writeln!(w, "long,13,23,{long}\nlast,14,24,").unwrap();
    }
    let measured = reset_peak();
    let before = mem_kb();
    let l = load(&path).unwrap();
    let after = mem_kb();
    let names: Vec<&str> = l.targets.iter().map(|t| t.name.as_str()).collect();
    assert_eq!(names, ["before", "after", "last"]);
    assert_eq!(l.targets[1].notes, "also fine, with a comma");
    let msgs: Vec<String> = l.problems.iter().map(|p| p.to_string()).collect();
    assert_eq!(msgs.len(), 2, "{msgs:?}");
    let file = path.display().to_string();
    assert_eq!(
        msgs[0],
        format!(
            "{file}, line 3: line is longer than {MAX_LINE_BYTES} bytes: a field exceeds the {MAX_FIELD_BYTES}-byte limit; row skipped unread"
        )
    );
    assert_eq!(
        msgs[1],
        format!(
            "{file}, line 5, field 'notes': {} bytes is longer than the {MAX_FIELD_BYTES}-byte limit",
            MAX_FIELD_BYTES + 1
        )
    );
    if let (true, Some((_, rss0)), Some((hwm1, _))) = (measured, before, after) {
        let grown_mb = (hwm1.saturating_sub(rss0)) as f64 / 1024.0;
        assert!(
            grown_mb < 5.0,
            "peak memory grew by {grown_mb:.1} MB for a 10 MB field"
        );
    }
}
