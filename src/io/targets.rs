//! Targets files: CSV with a header row, or TOML with `[[target]]` tables.
//!
//! What the fields are, their units, bounds and which kind needs which, is the
//! business of the tables in [`crate::io::kinds`]; this module reads files
//! against them. Required fields: `name`, `ra`, `dec`; `kind` is one of the
//! kinds table's names (default `plain`). A bad row is reported with its file,
//! line and field, and the good rows still load. A field rung does not read is
//! never ignored silently: one that looks like a misspelt field (`paralax_mas`)
//! refuses the rows that give it a value, any other is named in a warning (and
//! kept by a save from the UI).
//!
//! Top-level TOML keys other than `target` are left to the programme settings
//! (they are not targets and are not read here).

pub use crate::io::csv_text::MAX_LINE_BYTES;
pub use crate::io::kinds::{
    BANDS, Cell, Kind, MAX_FIELD_BYTES, Target, VALID_FROM_EPOCH_YR, VALID_TO_EPOCH_YR,
    target_from_fields,
};

use crate::error::{Location, Result, RungError};
use crate::io::csv_text::{Broken, Event, Item, Layout, Record, Records, RowRef};
use crate::io::kinds::{
    AsWritten, COLUMNS, Need, Slots, Written, check_len, column_index, cut, target_from_pairs,
    target_from_slots,
};
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Targets read from a file, with the rows that were refused.
#[derive(Debug, Default)]
pub struct Loaded {
    /// Good targets, in file order.
    pub targets: Vec<Target>,
    /// One error per refused row, with file, line and field.
    pub problems: Vec<RungError>,
    /// Things read past without refusing a row (a column rung does not read),
    /// with file, line and field.
    pub warnings: Vec<RungError>,
    /// The CSV file as written, when it was asked for ([`load_keeping`]).
    pub layout: Option<Arc<Layout>>,
}

/// `line` 0 means "not known" and is left out of the message.
fn loc(file: &Path, line: usize, field: &str) -> Location {
    Location {
        file: Some(file.to_path_buf()),
        line: (line > 0).then_some(line),
        field: if field.is_empty() {
            None
        } else {
            Some(field.to_string())
        },
    }
}

fn in_file(file: &Path, line: usize, field: &str, msg: impl Into<String>) -> RungError {
    RungError::InFile {
        loc: loc(file, line, field),
        msg: msg.into(),
    }
}

/// The field of the tables a name not in them was probably meant to be:
/// the same but for case, spaces or dashes; the name without its unit
/// (`period` for `period_d`); or one or two letters off.
pub fn meant_field(key: &str) -> Option<&'static str> {
    let norm = |s: &str| -> String {
        s.chars()
            .filter(|c| !matches!(c, '_' | '-' | ' ' | '.'))
            .flat_map(char::to_lowercase)
            .collect()
    };
    let k = norm(key);
    let lower = key.trim().to_ascii_lowercase();
    if k.is_empty() {
        return None;
    }
    let mut best: Option<(usize, &'static str)> = None;
    for c in COLUMNS {
        let d = if norm(c.key) == k
            || c.key
                .strip_prefix(lower.as_str())
                .is_some_and(|rest| rest.starts_with('_'))
        {
            0
        } else {
            edit_distance(&k, &norm(c.key))
        };
        let allowed = if k.chars().count() <= 4 { 1 } else { 2 };
        if d <= allowed && best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, c.key));
        }
    }
    best.map(|(_, k)| k)
}

/// Levenshtein distance (insertions, deletions, substitutions), by characters.
fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.iter().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != cb))
                .min(prev[j + 1] + 1)
                .min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

/// What is said of a field rung does not read, near a field it does.
fn misspelt(meant: &str) -> String {
    format!("is not a field rung reads; did you mean '{meant}'?")
}

/// What is said of a field rung does not read.
const UNREAD: &str =
    "is not a field rung reads: its values are ignored (a save from the UI keeps them)";

/// Largest TOML targets file, bytes (TOML is parsed whole; use CSV for more).
pub const MAX_TOML_BYTES: u64 = 64 * 1024 * 1024;
/// How often (bytes read) the progress callback is called while streaming.
const PROGRESS_STEP_BYTES: u64 = 1024 * 1024;

/// Names already used, kept compactly for the duplicate check.
type Seen = std::collections::HashSet<Box<str>>;

/// Where the reader's findings go.
struct Sink<'a> {
    target: &'a mut dyn FnMut(Target),
    problem: &'a mut dyn FnMut(RungError),
    warning: &'a mut dyn FnMut(RungError),
    progress: &'a mut dyn FnMut(u64, u64),
}

/// Building a [`Layout`] while reading (only when a save must keep the file as written).
struct Keep<'t> {
    text: &'t str,
    items: Vec<Item>,
    columns: Vec<String>,
    newline: String,
    /// Per target delivered, in order: its item.
    rows: Vec<usize>,
}

impl Keep<'_> {
    fn verbatim(&mut self, span: &std::ops::Range<u64>) {
        self.items
            .push(Item::Verbatim(span.start as usize..span.end as usize));
    }
}

/// The header of a CSV file, checked.
struct Header {
    /// Column names, lower case, trimmed.
    names: Vec<String>,
    /// Per column: its index in COLUMNS.
    slot: Vec<Option<usize>>,
    /// Per column not read: the field it was probably meant to be.
    meant: Vec<Option<&'static str>>,
}

fn read_header(rec: &Record, file: &Path, sink: &mut Sink) -> Option<Header> {
    if let Some(i) = rec.first_not_utf8() {
        (sink.problem)(in_file(
            file,
            rec.line,
            "",
            format!(
                "unreadable header: field {} is not UTF-8 text (save the file as UTF-8)",
                i + 1
            ),
        ));
        return None;
    }
    // A byte-order mark before the first name (some spreadsheets write one) is not part of it.
    let names: Vec<String> = (0..rec.len())
        .map(|i| {
            let v = rec.value(i).unwrap_or("");
            let v = if i == 0 {
                v.trim_start_matches('\u{feff}')
            } else {
                v
            };
            v.trim().to_ascii_lowercase()
        })
        .collect();
    let required: Vec<&str> = COLUMNS
        .iter()
        .filter(|c| c.every_kind && matches!(c.need, Need::Required(_)))
        .map(|c| c.key)
        .collect();
    for need in &required {
        if !names.iter().any(|h| h == need) {
            (sink.problem)(in_file(
                file,
                rec.line,
                need,
                format!(
                    "the header has no '{need}' column (required: {})",
                    required.join(", ")
                ),
            ));
            return None;
        }
    }
    let slot: Vec<Option<usize>> = names.iter().map(|h| column_index(h)).collect();
    for (j, s) in slot.iter().enumerate() {
        if let Some(first) = s.and_then(|s| slot[..j].iter().position(|x| *x == Some(s))) {
            (sink.problem)(in_file(
                file,
                rec.line,
                &names[j],
                format!(
                    "the header has this column twice (columns {} and {}): which one to read is unclear, so no row was read",
                    first + 1,
                    j + 1
                ),
            ));
            return None;
        }
    }
    let mut meant = vec![None; names.len()];
    for (j, name) in names.iter().enumerate() {
        if slot[j].is_some() {
            continue;
        }
        meant[j] = meant_field(name);
        if meant[j].is_none() {
            let what = if name.is_empty() {
                format!(
                    "column {} has no name: its values are ignored (a save from the UI keeps them)",
                    j + 1
                )
            } else {
                UNREAD.to_string()
            };
            (sink.warning)(in_file(file, rec.line, name, what));
        }
    }
    Some(Header { names, slot, meant })
}

/// Most records read before they are turned into targets together (on all
/// cores) and handed on in file order.
const BATCH_RECORDS: usize = 256;
/// Most bytes of record text held in one batch (a batch is handed on early
/// when it reaches this).
const BATCH_BYTES: usize = 4 * 1024 * 1024;

/// The reader behind every CSV entry point: streams `reader` record by record
/// (memory bounded by two batches of [`BATCH_RECORDS`] records or about
/// [`BATCH_BYTES`], each line at most [`MAX_LINE_BYTES`] and each quoted
/// field at most [`MAX_FIELD_BYTES`], plus the names seen for the duplicate
/// check). The records of a batch become targets on all cores while the next
/// batch is read; targets, refused rows and the duplicate check then go in
/// file order, so what is reported, and in which order, does not depend on
/// the batching. With `keep`, the layout of the file is recorded too.
fn read_csv<R: std::io::Read>(
    reader: R,
    file: &Path,
    total_bytes: u64,
    mut keep: Option<&mut Keep>,
    sink: &mut Sink,
) {
    let mut records = Records::new(std::io::BufReader::with_capacity(64 * 1024, reader));
    let mut rec = Record::default();
    let mut seen = Seen::new();
    let mut last_progress = 0u64;
    // Records after the header, read but not yet sent on (the first `n` of
    // `batch`; the rest are spare buffers), and their bytes. A full batch is
    // turned into targets on the pool while the next one is read here; the
    // batch before it, parsed meanwhile, is handed on first, so everything
    // still goes out in file order.
    let mut batch: Batch = Vec::new();
    let mut n = 0usize;
    let mut bytes = 0usize;
    let mut shared: Option<Arc<Header>> = None;
    let mut in_flight: Option<std::sync::mpsc::Receiver<Parsed>> = None;
    let mut spare: Batch = Vec::new();
    let keeping = keep.is_some();
    loop {
        let event = match records.next_into(&mut rec) {
            Ok(Some(e)) => e,
            Ok(None) => break,
            Err(e) => {
                if let Some(h) = &shared {
                    if let Some((done, outcomes)) = in_flight.take().and_then(|rx| rx.recv().ok()) {
                        hand_on(&done, outcomes, file, &mut seen, keep.as_deref_mut(), sink);
                    }
                    let outcomes = parse_batch(&batch[..n], h, file, keeping);
                    hand_on(
                        &batch[..n],
                        outcomes,
                        file,
                        &mut seen,
                        keep.as_deref_mut(),
                        sink,
                    );
                    n = 0;
                }
                (sink.problem)(in_file(file, rec.line, "", format!("unreadable: {e}")));
                break;
            }
        };
        let r = records.bytes_read();
        if r >= last_progress + PROGRESS_STEP_BYTES {
            last_progress = r;
            (sink.progress)(r, total_bytes.max(r));
        }
        let Some(h) = &shared else {
            match event {
                Event::Skipped => {
                    if let Some(k) = keep.as_deref_mut() {
                        k.verbatim(&rec.span);
                    }
                }
                Event::Broken(Broken::Overlong) => {
                    (sink.problem)(in_file(
                        file,
                        rec.line,
                        "",
                        format!("the header line is longer than {MAX_LINE_BYTES} bytes"),
                    ));
                    return;
                }
                Event::Broken(_) => {
                    (sink.problem)(in_file(
                        file,
                        rec.line,
                        "",
                        "unreadable header: a quote in it is not closed",
                    ));
                    return;
                }
                Event::Record => {
                    let header = match read_header(&rec, file, sink) {
                        Some(h) => h,
                        None => return,
                    };
                    if let Some(k) = keep.as_deref_mut() {
                        let s = rec.span.start as usize;
                        let e = rec.span.end as usize;
                        k.items
                            .push(Item::Header(s..e - rec.terminator, e - rec.terminator..e));
                        k.columns = header.names.clone();
                        let t = k.text.get(e - rec.terminator..e).unwrap_or("");
                        if !t.is_empty() {
                            k.newline = t.to_string();
                        }
                    }
                    shared = Some(Arc::new(header));
                }
            }
            continue;
        };
        // Into the batch; `rec` takes a spare buffer (and keeps the line
        // just read, which a read error after it names, as before).
        if n == batch.len() {
            batch.push((event, Record::default()));
        }
        batch[n].0 = event;
        std::mem::swap(&mut rec, &mut batch[n].1);
        rec.line = batch[n].1.line;
        bytes += (batch[n].1.span.end - batch[n].1.span.start) as usize;
        n += 1;
        if n == BATCH_RECORDS || bytes >= BATCH_BYTES {
            // The batch before this one (parsed meanwhile) goes on first.
            if let Some((done, outcomes)) = in_flight.take().and_then(|rx| rx.recv().ok()) {
                hand_on(&done, outcomes, file, &mut seen, keep.as_deref_mut(), sink);
                spare = done;
            }
            let mut full = std::mem::take(&mut spare);
            std::mem::swap(&mut full, &mut batch);
            full.truncate(n);
            let (tx, rx) = std::sync::mpsc::channel();
            if rayon::current_thread_index().is_some() {
                // Already on the pool (which may be this one thread): parse
                // here rather than wait on a job queued behind this one.
                let outcomes = parse_batch(&full, h, file, keeping);
                let _ = tx.send((full, outcomes));
            } else {
                let (h, path) = (h.clone(), file.to_path_buf());
                rayon::spawn(move || {
                    let outcomes = parse_batch(&full, &h, &path, keeping);
                    let _ = tx.send((full, outcomes));
                });
            }
            in_flight = Some(rx);
            n = 0;
            bytes = 0;
        }
    }
    if let Some(h) = &shared {
        if let Some((done, outcomes)) = in_flight.take().and_then(|rx| rx.recv().ok()) {
            hand_on(&done, outcomes, file, &mut seen, keep.as_deref_mut(), sink);
        }
        let outcomes = parse_batch(&batch[..n], h, file, keeping);
        hand_on(&batch[..n], outcomes, file, &mut seen, keep, sink);
    }
    let r = records.bytes_read();
    (sink.progress)(r, total_bytes.max(r));
}

/// Records after the header, with what was found reading each.
type Batch = Vec<(Event, Record)>;
/// What each record of a batch came to: `None` for a skipped line, else the
/// target or why the row is refused (all but a name used twice).
type Outcomes = Vec<Option<std::result::Result<Target, RungError>>>;
/// A batch parsed on the pool, with its outcomes.
type Parsed = (Batch, Outcomes);

/// The records of a batch (after the header) turned into targets or
/// refusals, on all cores.
fn parse_batch(batch: &[(Event, Record)], h: &Header, file: &Path, keeping: bool) -> Outcomes {
    use rayon::prelude::*;
    batch
        .par_iter()
        .map(|(event, rec)| match *event {
            Event::Skipped => None,
            Event::Broken(Broken::Overlong) => Some(Err(in_file(
                file,
                rec.line,
                "",
                format!(
                    "line is longer than {MAX_LINE_BYTES} bytes: a field exceeds the {MAX_FIELD_BYTES}-byte limit; row skipped unread"
                ),
            ))),
            Event::Broken(Broken::Unclosed { field }) => Some(Err(in_file(
                file,
                rec.line,
                h.names.get(field).map_or("", |s| s.as_str()),
                "the quote opening this field is never closed; the lines after it are read as rows of their own",
            ))),
            Event::Broken(Broken::AfterQuote { field }) => Some(Err(in_file(
                file,
                rec.line,
                h.names.get(field).map_or("", |s| s.as_str()),
                "text follows the closing quote of this field (inside quotes, write a quote as \"\")",
            ))),
            Event::Record => Some(row(rec, h, file, keeping)),
        })
        .collect()
}

/// A parsed batch ([`parse_batch`]) handed on in file order, with the
/// duplicate check.
fn hand_on(
    batch: &[(Event, Record)],
    outcomes: Outcomes,
    file: &Path,
    seen: &mut Seen,
    mut keep: Option<&mut Keep>,
    sink: &mut Sink,
) {
    for ((_, rec), outcome) in batch.iter().zip(outcomes) {
        let Some(outcome) = outcome else {
            if let Some(k) = keep.as_deref_mut() {
                k.verbatim(&rec.span);
            }
            continue;
        };
        match outcome.and_then(|t| first_use(t, file, rec.line, seen)) {
            Err(p) => {
                (sink.problem)(p);
                if let Some(k) = keep.as_deref_mut() {
                    k.verbatim(&rec.span);
                }
            }
            Ok(t) => {
                if let Some(k) = keep.as_deref_mut() {
                    let s = rec.span.start as usize;
                    let e = rec.span.end as usize;
                    k.rows.push(k.items.len());
                    k.items.push(Item::Row {
                        content: s..e - rec.terminator,
                        terminator: e - rec.terminator..e,
                        fields: (0..rec.len())
                            .map(|i| {
                                let r = rec.raw_range(i);
                                s + r.start..s + r.end
                            })
                            .collect(),
                    });
                }
                (sink.target)(t);
            }
        }
    }
}

/// `t`, unless an earlier row used its name (then why the row is refused).
fn first_use(
    t: Target,
    file: &Path,
    line: usize,
    seen: &mut Seen,
) -> std::result::Result<Target, RungError> {
    // One look in the set: a name already there is left as it was.
    if !seen.insert(t.name.as_str().into()) {
        return Err(in_file(
            file,
            line,
            "name",
            format!("'{}' is already used by an earlier row", cut(&t.name)),
        ));
    }
    Ok(t)
}

/// Read one record against the header: the target, or why the row is
/// refused (all but a name used twice, which [`first_use`] checks in file order).
fn row(
    rec: &Record,
    h: &Header,
    file: &Path,
    keep: bool,
) -> std::result::Result<Target, RungError> {
    let line = rec.line;
    if rec.len() != h.names.len() {
        return Err(in_file(
            file,
            line,
            "",
            format!(
                "row has {} fields but the header has {}",
                rec.len(),
                h.names.len()
            ),
        ));
    }
    // One pass over the fields: a field that is not UTF-8 is reported
    // before any other problem of the row (the first such field), else the
    // first field too long or in a misspelt column.
    let mut slots: Slots = [None; COLUMNS.len()];
    let mut first_bad: Option<RungError> = None;
    for j in 0..rec.len() {
        let Ok(v) = rec.value(j) else {
            return Err(in_file(
                file,
                line,
                "",
                format!(
                    "field {} is not UTF-8 text (save the file as UTF-8); row skipped",
                    j + 1
                ),
            ));
        };
        if first_bad.is_some() {
            continue;
        }
        if let Err((f, m)) = check_len(&h.names[j], v) {
            first_bad = Some(in_file(file, line, &f, m));
            continue;
        }
        match (h.slot[j], h.meant[j]) {
            (Some(i), _) => slots[i] = Some(v),
            (None, Some(m)) if !v.is_empty() => {
                first_bad = Some(in_file(file, line, &h.names[j], misspelt(m)));
            }
            _ => {}
        }
    }
    if let Some(e) = first_bad {
        return Err(e);
    }
    let mut t = target_from_slots(&slots).map_err(|(f, m)| in_file(file, line, &f, m))?;
    if keep {
        t.written = Written(Some(Arc::new(AsWritten {
            fields: (0..rec.len())
                .map(|j| (h.names[j].clone(), rec.value(j).unwrap_or("").to_string()))
                .collect(),
            row: None,
        })));
    }
    Ok(t)
}

/// The CSV reader behind [`parse_csv`], [`stream_csv`] and [`load`]: reads
/// `reader` record by record, never holding more than two batches of records
/// (each at most [`BATCH_RECORDS`], about [`BATCH_BYTES`]; each line at most
/// [`MAX_LINE_BYTES`], each quoted field at most [`MAX_FIELD_BYTES`]).
/// Good targets go to `on_target`, refused rows to `on_problem`, columns rung
/// does not read to `on_warning`; `total_bytes` is passed to `on_progress`
/// with the bytes read so far (about every MiB, and once at the end).
pub fn stream_csv_reader<R: std::io::Read>(
    reader: R,
    file: &Path,
    total_bytes: u64,
    on_target: &mut dyn FnMut(Target),
    on_problem: &mut dyn FnMut(RungError),
    on_warning: &mut dyn FnMut(RungError),
    on_progress: &mut dyn FnMut(u64, u64),
) {
    let mut sink = Sink {
        target: on_target,
        problem: on_problem,
        warning: on_warning,
        progress: on_progress,
    };
    read_csv(reader, file, total_bytes, None, &mut sink);
}

/// Stream a CSV targets file: each good target goes to `on_target`, each
/// refused row to `on_problem` and each column rung does not read to
/// `on_warning`, in file order, with memory bounded by two batches of lines
/// ([`BATCH_BYTES`] each) plus the set of names seen (for the duplicate check),
/// whatever the size of the file.
pub fn stream_csv(
    path: &Path,
    on_target: &mut dyn FnMut(Target),
    on_problem: &mut dyn FnMut(RungError),
    on_warning: &mut dyn FnMut(RungError),
) -> Result<()> {
    stream_csv_progress(path, on_target, on_problem, on_warning, &mut |_, _| {})
}

/// [`stream_csv`] with a progress callback `on_progress(bytes_read, total_bytes)`.
pub fn stream_csv_progress(
    path: &Path,
    on_target: &mut dyn FnMut(Target),
    on_problem: &mut dyn FnMut(RungError),
    on_warning: &mut dyn FnMut(RungError),
    on_progress: &mut dyn FnMut(u64, u64),
) -> Result<()> {
    let f = open_file(path)?;
    let total = f.metadata().map(|m| m.len()).unwrap_or(0);
    stream_csv_reader(
        f,
        path,
        total,
        on_target,
        on_problem,
        on_warning,
        on_progress,
    );
    Ok(())
}

fn open_file(path: &Path) -> Result<std::fs::File> {
    let meta = std::fs::metadata(path).map_err(|e| RungError::io(path, e))?;
    if meta.is_dir() {
        return Err(RungError::invalid(
            "targets file",
            format!("{} is a folder", path.display()),
        ));
    }
    std::fs::File::open(path).map_err(|e| RungError::io(path, e))
}

/// Parse CSV text (header row first).
pub fn parse_csv(text: &str, file: &Path) -> Loaded {
    csv_text(text, file, false)
}

/// Parse CSV text keeping how it was written (see [`load_keeping`]).
pub fn parse_csv_keeping(text: &str, file: &Path) -> Loaded {
    csv_text(text, file, true)
}

fn csv_text(text: &str, file: &Path, keep_layout: bool) -> Loaded {
    let mut out = Loaded::default();
    let mut keep = keep_layout.then(|| Keep {
        text,
        items: Vec::new(),
        columns: Vec::new(),
        newline: "\n".into(),
        rows: Vec::new(),
    });
    let Loaded {
        targets,
        problems,
        warnings,
        ..
    } = &mut out;
    let mut sink = Sink {
        target: &mut |t| targets.push(t),
        problem: &mut |p| problems.push(p),
        warning: &mut |w| warnings.push(w),
        progress: &mut |_, _| {},
    };
    read_csv(
        text.as_bytes(),
        file,
        text.len() as u64,
        keep.as_mut(),
        &mut sink,
    );
    if let Some(k) = keep.filter(|k| !k.columns.is_empty()) {
        let layout = Arc::new(Layout {
            text: text.to_string(),
            columns: k.columns,
            items: k.items,
            newline: k.newline,
        });
        for (t, item) in out.targets.iter_mut().zip(k.rows) {
            let fields = t
                .written
                .0
                .as_ref()
                .map(|w| w.fields.clone())
                .unwrap_or_default();
            t.written = Written(Some(Arc::new(AsWritten {
                fields,
                row: Some(RowRef {
                    layout: layout.clone(),
                    item,
                }),
            })));
        }
        out.layout = Some(layout);
    }
    out
}

/// Parse TOML text: `[[target]]` tables with the same field names as the CSV columns.
pub fn parse_toml(text: &str, file: &Path) -> Loaded {
    toml_text(text, file, false)
}

fn toml_text(text: &str, file: &Path, keep: bool) -> Loaded {
    use toml::de::{DeTable, DeValue};
    let mut out = Loaded::default();
    let doc = match DeTable::parse(text) {
        Ok(d) => d,
        Err(e) => {
            let line = e
                .span()
                .map(|s| crate::error::line_at(text, s.start))
                .unwrap_or(1);
            out.problems.push(in_file(
                file,
                line,
                "",
                format!("not valid TOML: {}", e.message()),
            ));
            return out;
        }
    };
    let Some(list) = doc
        .get_ref()
        .get("target")
        .and_then(|v| v.get_ref().as_array())
    else {
        out.problems
            .push(in_file(file, 1, "target", "no [[target]] tables found"));
        return out;
    };
    // Lines of the [[target]] headers, to place errors.
    let header_lines = crate::io::links::array_table_lines(text, "target", list.len());
    let mut seen = Seen::new();
    for (i, item) in list.iter().enumerate() {
        let line = header_lines.get(i).copied().unwrap_or(0);
        let Some(tab) = item.get_ref().as_table() else {
            out.problems.push(in_file(file, line, "", "not a table"));
            continue;
        };
        let mut fields = Vec::new();
        let mut refused = None;
        for (k, v) in tab.iter() {
            let key = k.get_ref().to_ascii_lowercase();
            let key_line = crate::error::line_at(text, k.span().start);
            let s = match v.get_ref() {
                DeValue::String(s) => s.to_string(),
                DeValue::Integer(i) if i.radix() == 10 => i.as_str().to_string(),
                DeValue::Integer(i) => i64::from_str_radix(i.as_str(), i.radix())
                    .map(|n| n.to_string())
                    .unwrap_or_else(|_| i.to_string()),
                DeValue::Float(f) => f.as_str().to_string(),
                DeValue::Boolean(b) => b.to_string(),
                DeValue::Datetime(d) => d.to_string(),
                _ => {
                    refused.get_or_insert((
                        line,
                        key.clone(),
                        "must be a single value".to_string(),
                    ));
                    continue;
                }
            };
            if column_index(&key).is_none() {
                match meant_field(&key) {
                    Some(m) => {
                        refused.get_or_insert((key_line, key.clone(), misspelt(m)));
                    }
                    None => out.warnings.push(in_file(file, key_line, &key, UNREAD)),
                }
            }
            fields.push((key, s));
        }
        if let Some((l, k, m)) = refused {
            out.problems.push(in_file(file, l, &k, m));
            continue;
        }
        match target_from_pairs(&fields, keep) {
            Ok(t) if seen.contains(t.name.as_str()) => out.problems.push(in_file(
                file,
                line,
                "name",
                format!("'{}' is already used by an earlier row", cut(&t.name)),
            )),
            Ok(t) => {
                seen.insert(t.name.as_str().into());
                out.targets.push(t);
            }
            Err((f, m)) => out.problems.push(in_file(file, line, &f, m)),
        }
    }
    out
}

/// Read a targets file (by extension: `.toml`, else CSV). CSV is always read
/// as a stream (see [`stream_csv`]), so even a file of millions of rows never
/// has its text in memory; TOML is parsed whole and refused above
/// [`MAX_TOML_BYTES`].
pub fn load(path: &Path) -> Result<Loaded> {
    load_with_progress(path, &mut |_, _| {})
}

fn is_toml(path: &Path) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("toml"))
}

/// [`load`] with a progress callback `on_progress(bytes_read, total_bytes)`
/// (called about every MiB while a CSV file streams, and once at the end).
pub fn load_with_progress(path: &Path, on_progress: &mut dyn FnMut(u64, u64)) -> Result<Loaded> {
    let mut out = Loaded::default();
    let Loaded {
        targets,
        problems,
        warnings,
        ..
    } = &mut out;
    stream(
        path,
        &mut |t| targets.push(t),
        &mut |p| problems.push(p),
        &mut |w| warnings.push(w),
        on_progress,
    )?;
    // Links name other rows: checked once every row is read.
    let links = crate::io::links::check(&out.targets, path, None);
    out.warnings.extend(links);
    Ok(out)
}

/// Read a targets file of either format (by extension, as [`load`]) handing
/// each good target, refused row and warning to its callback in file order,
/// holding none of them: a CSV file streams ([`stream_csv_progress`]); a TOML
/// file, read whole (at most [`MAX_TOML_BYTES`]), is parsed and then handed
/// over.
pub fn stream(
    path: &Path,
    on_target: &mut dyn FnMut(Target),
    on_problem: &mut dyn FnMut(RungError),
    on_warning: &mut dyn FnMut(RungError),
    on_progress: &mut dyn FnMut(u64, u64),
) -> Result<()> {
    if !is_toml(path) {
        return stream_csv_progress(path, on_target, on_problem, on_warning, on_progress);
    }
    let text = read_toml_text(path)?;
    let len = text.len() as u64;
    let l = parse_toml(&text, path);
    drop(text);
    l.warnings.into_iter().for_each(&mut *on_warning);
    l.problems.into_iter().for_each(&mut *on_problem);
    l.targets.into_iter().for_each(&mut *on_target);
    on_progress(len, len);
    Ok(())
}

fn read_toml_text(path: &Path) -> Result<String> {
    let f = open_file(path)?;
    let len = f.metadata().map(|m| m.len()).unwrap_or(0);
    if len > MAX_TOML_BYTES {
        return Err(RungError::InFile {
            loc: Location {
                file: Some(PathBuf::from(path)),
                line: None,
                field: None,
            },
            msg: format!(
                "a TOML targets file is read whole and may hold at most {} MiB ({len} bytes given); use CSV for larger programmes",
                MAX_TOML_BYTES / (1024 * 1024)
            ),
        });
    }
    drop(f);
    let bytes = std::fs::read(path).map_err(|e| RungError::io(path, e))?;
    String::from_utf8(bytes).map_err(|e| RungError::InFile {
        loc: Location {
            file: Some(PathBuf::from(path)),
            line: Some(
                1 + e.as_bytes()[..e.utf8_error().valid_up_to()]
                    .iter()
                    .filter(|b| **b == b'\n')
                    .count(),
            ),
            field: None,
        },
        msg: "is not UTF-8 text".into(),
    })
}

/// Read a programme to edit and save: like [`load`], but every target keeps
/// how its fields were written and, for a CSV file that is UTF-8 text, the
/// file's layout (comments, column order, refused rows), so that
/// [`crate::io::write_targets::to_csv`] writes back what the user wrote with
/// only the edits changed. The text is held whole (a programme being edited
/// is read whole anyway).
pub fn load_keeping(path: &Path) -> Result<Loaded> {
    let with_links = |mut l: Loaded, text: &str| {
        let links = crate::io::links::check(&l.targets, path, Some(text));
        l.warnings.extend(links);
        l
    };
    if is_toml(path) {
        let text = read_toml_text(path)?;
        return Ok(with_links(toml_text(&text, path, true), &text));
    }
    let f = open_file(path)?;
    drop(f);
    let bytes = std::fs::read(path).map_err(|e| RungError::io(path, e))?;
    match String::from_utf8(bytes) {
        Ok(text) => Ok(with_links(csv_text(&text, path, true), &text)),
        // A file with rows that are not UTF-8: read as a stream, without layout.
        Err(_) => load(path),
    }
}

/// The target named `name` in `file`'s targets. Names match exactly, case
/// included: a name that differs only in case is offered as a hint (and when
/// several do, all are named), never taken in its place.
pub fn find_by_name(targets: Vec<Target>, name: &str, file: &Path) -> Result<Target> {
    let mut near = Vec::new();
    for t in targets {
        if t.name == name {
            return Ok(t);
        }
        if t.name.to_lowercase() == name.to_lowercase() {
            near.push(format!("'{}'", t.name));
        }
    }
    let hint = match near.len() {
        0 => String::new(),
        1 => format!(
            "; did you mean {}? (names match exactly, case included)",
            near[0]
        ),
        _ => format!(
            "; names match exactly, case included, and {} differ from it only in case",
            near.join(" and ")
        ),
    };
    Err(in_file(
        file,
        0,
        "",
        format!("no target named '{}'{hint}", cut(name)),
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn broken_row_is_reported_and_good_rows_load() {
        let csv = "name,ra,dec,kind,parallax_mas\nA,10.0,-20,parallax,12.5\nB,25:00:00,10,plain,\nC,05:00:00,+10:00:00,plain,\nD,1,2,parallax,-3\n";
        let l = parse_csv(csv, Path::new("t.csv"));
        assert_eq!(l.targets.len(), 2);
        assert_eq!(l.problems.len(), 2);
        let m = l.problems[0].to_string();
        assert!(
            m.contains("t.csv") && m.contains("line 3") && m.contains("field 'ra'"),
            "{m}"
        );
        let m = l.problems[1].to_string();
        assert!(m.contains("line 5") && m.contains("parallax_mas"), "{m}");
    }

    #[test]
    fn toml_targets() {
        let t = "[[target]]\nname = \"A\"\nra = \"05:34:31.9\"\ndec = 22.0\nkind = \"pulsator\"\nperiod_d = 5.3\nepoch_max_bjd = 2461000.5\n\n[[target]]\nname = \"B\"\nra = 1\ndec = 100\n";
        let l = parse_toml(t, Path::new("t.toml"));
        assert_eq!(l.targets.len(), 1);
        let m = l.problems[0].to_string();
        assert!(m.contains("line 9") && m.contains("dec"), "{m}");
    }

    #[test]
    fn a_byte_order_mark_is_not_part_of_the_first_column() {
        let l = parse_csv("\u{feff}Name,RA,Dec\r\nA,1,2\r\n", Path::new("t.csv"));
        assert!(
            l.problems.is_empty() && l.warnings.is_empty(),
            "{:?}",
            l.problems
        );
        assert_eq!(l.targets.len(), 1);
    }

    #[test]
    fn huge_field_rejected() {
        let big = "x".repeat(MAX_FIELD_BYTES + 1);
        let csv = format!("name,ra,dec\n{big},1,2\nok,1,2\n");
        let l = parse_csv(&csv, Path::new("t.csv"));
        assert_eq!(l.targets.len(), 1);
        assert!(l.problems[0].to_string().contains("limit"));
    }

    #[test]
    fn names_match_exactly() {
        let l = parse_csv(
            "name,ra,dec\nAlpha,1,2\nALPHA,3,4\nbeta,5,6\n",
            Path::new("t.csv"),
        );
        let f = Path::new("t.csv");
        assert_eq!(
            find_by_name(l.targets.clone(), "ALPHA", f).unwrap().ra_deg,
            3.0
        );
        let e = find_by_name(l.targets.clone(), "Beta", f)
            .unwrap_err()
            .to_string();
        assert!(
            e.ends_with("did you mean 'beta'? (names match exactly, case included)"),
            "{e}"
        );
        let e = find_by_name(l.targets, "alpha", f).unwrap_err().to_string();
        assert!(
            e.contains("'Alpha' and 'ALPHA' differ from it only in case"),
            "{e}"
        );
    }

    #[test]
    fn misspelt_fields_are_recognised() {
        for (typed, meant) in [
            ("paralax_mas", "parallax_mas"),
            ("Parallax MAS", "parallax_mas"),
            ("period", "period_d"),
            ("pm_ra_masy", "pm_ra_masyr"),
            ("note", "notes"),
            ("decl", "dec"),
        ] {
            assert_eq!(meant_field(typed), Some(meant), "{typed}");
        }
        for other in ["observer", "id", "comment", "", "host_galaxy"] {
            assert_eq!(meant_field(other), None, "{other}");
        }
    }
}
