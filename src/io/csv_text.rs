//! The text of a CSV targets file, record by record, with bounded memory, and
//! its layout (comments, rows and how each field was written) for a save that
//! keeps what the user wrote.
//!
//! The grammar is RFC 4180 with the habits of hand-edited files: a line
//! starting with `#` is a comment, blank lines are skipped, spaces around a
//! field are not part of it, and a field may be quoted (`"a, b"`, `""` for a
//! quote) after leading spaces. A quoted field may run over several lines,
//! but not past [`MAX_FIELD_BYTES`]: a quote that is not closed by then, or
//! whose closing quote is followed by more text, is refused with the line it
//! opened on, and the lines after that line are read as rows of their own. So
//! an unclosed quote can never swallow the rest of a file. A quote inside an
//! unquoted field is an ordinary character (`12"`).

use std::collections::VecDeque;
use std::io::BufRead;
use std::ops::Range;
use std::sync::Arc;

/// Longest accepted field, bytes (in a CSV or a TOML targets file). Longer
/// fields are rejected, not loaded.
pub const MAX_FIELD_BYTES: usize = 4096;

/// Longest accepted physical line of a CSV targets file, bytes. A longer line
/// must hold a field over [`MAX_FIELD_BYTES`] (24 known columns of at most
/// 4096 bytes fit well inside it); it is skipped without being held in memory.
pub const MAX_LINE_BYTES: usize = 256 * 1024;

/// Why a record was refused by the splitter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Broken {
    /// A physical line over [`MAX_LINE_BYTES`] (its text was never held).
    Overlong,
    /// A quote opened in field `field` (0-based) and not closed.
    Unclosed {
        /// Which field (0-based).
        field: usize,
    },
    /// Text after the closing quote of field `field` (0-based), on one line.
    AfterQuote {
        /// Which field (0-based).
        field: usize,
    },
}

/// What [`Records::next_into`] found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Event {
    /// A record, in the [`Record`] given.
    Record,
    /// A comment or blank line.
    Skipped,
    /// A record that cannot be split into fields; only its first line is
    /// consumed (except for [`Broken::Overlong`], whose one line is).
    Broken(Broken),
}

/// One physical line.
#[derive(Debug)]
struct Line {
    /// 1-based line number.
    no: usize,
    /// Byte offset of its start in the stream.
    start: u64,
    /// Its bytes, terminator included (cut at [`MAX_LINE_BYTES`] when overlong).
    bytes: Vec<u8>,
    /// Its whole length in the stream, terminator included.
    len: u64,
    /// Whether it was longer than [`MAX_LINE_BYTES`].
    overlong: bool,
}

impl Line {
    /// Length of the content without the terminator.
    fn content_len(&self) -> usize {
        let b = &self.bytes;
        if self.overlong {
            return b.len();
        }
        let mut n = b.len();
        if n > 0 && b[n - 1] == b'\n' {
            n -= 1;
            if n > 0 && b[n - 1] == b'\r' {
                n -= 1;
            }
        }
        n
    }
}

/// A record: its place in the stream and its fields (reused between records
/// so that streaming a large file allocates little).
#[derive(Debug, Default, Clone)]
pub struct Record {
    /// Line the record starts on (1-based).
    pub line: usize,
    /// Byte span in the stream, terminator included.
    pub span: Range<u64>,
    /// Length of the record's terminator (0 at the end of a file without one).
    pub terminator: usize,
    /// The raw bytes of the record, terminator excluded.
    raw: Vec<u8>,
    /// The unquoted values, one after another.
    values: Vec<u8>,
    /// Per field: (value range in `values`, raw range in `raw`).
    fields: Vec<(Range<usize>, Range<usize>)>,
}

impl Record {
    /// Number of fields.
    pub fn len(&self) -> usize {
        self.fields.len()
    }
    /// Whether there are no fields.
    pub fn is_empty(&self) -> bool {
        self.fields.is_empty()
    }
    /// Field `i`'s value, unquoted and trimmed; `Err` when it is not UTF-8.
    pub fn value(&self, i: usize) -> Result<&str, std::str::Utf8Error> {
        // Blanks (ASCII) trimmed from the bytes first: the same text, and
        // text that is not UTF-8 stays so (no blank completes a sequence).
        let mut b = &self.values[self.fields[i].0.clone()];
        while let [b' ' | b'\t', rest @ ..] = b {
            b = rest;
        }
        while let [rest @ .., b' ' | b'\t'] = b {
            b = rest;
        }
        std::str::from_utf8(b)
    }
    /// Field `i`'s raw range within the record (relative to `span.start`).
    pub fn raw_range(&self, i: usize) -> Range<usize> {
        self.fields[i].1.clone()
    }
    /// The first field that is not UTF-8 text (0-based).
    pub fn first_not_utf8(&self) -> Option<usize> {
        (0..self.len()).find(|&i| self.value(i).is_err())
    }
}

/// Records of a CSV text read line by line: memory is bounded by one line of
/// [`MAX_LINE_BYTES`] plus one quoted field of [`MAX_FIELD_BYTES`], whatever
/// the size of the file.
pub struct Records<R: BufRead> {
    src: R,
    /// Lines read but not yet used (given back after an unclosed quote).
    ahead: VecDeque<Line>,
    next_no: usize,
    next_start: u64,
    /// Bytes read from the source so far.
    read: u64,
    eof: bool,
}

impl<R: BufRead> Records<R> {
    /// Read records from `src`.
    pub fn new(src: R) -> Self {
        Records {
            src,
            ahead: VecDeque::new(),
            next_no: 1,
            next_start: 0,
            read: 0,
            eof: false,
        }
    }

    /// Bytes read from the source so far.
    pub fn bytes_read(&self) -> u64 {
        self.read
    }

    fn read_line(&mut self) -> std::io::Result<Option<Line>> {
        if let Some(l) = self.ahead.pop_front() {
            return Ok(Some(l));
        }
        if self.eof {
            return Ok(None);
        }
        use std::io::Read as _;
        let mut bytes = Vec::new();
        let limit = MAX_LINE_BYTES + 1;
        let n = (&mut self.src)
            .take(limit as u64)
            .read_until(b'\n', &mut bytes)?;
        if n == 0 {
            self.eof = true;
            return Ok(None);
        }
        let mut len = n as u64;
        let overlong = n == limit && bytes.last() != Some(&b'\n');
        if overlong {
            // Skip the rest of the line without holding it.
            bytes.truncate(1);
            loop {
                let buf = self.src.fill_buf()?;
                if buf.is_empty() {
                    break;
                }
                let (take, newline) = match buf.iter().position(|b| *b == b'\n') {
                    Some(i) => (i + 1, true),
                    None => (buf.len(), false),
                };
                self.src.consume(take);
                len += take as u64;
                if newline {
                    break;
                }
            }
        }
        self.read += len;
        let l = Line {
            no: self.next_no,
            start: self.next_start,
            bytes,
            len,
            overlong,
        };
        self.next_no += 1;
        self.next_start += len;
        Ok(Some(l))
    }

    /// The next event; a record's fields go into `rec` (whose `line` and
    /// `span` are set for every event). `None` at the end.
    pub fn next_into(&mut self, rec: &mut Record) -> std::io::Result<Option<Event>> {
        let Some(first) = self.read_line()? else {
            return Ok(None);
        };
        rec.line = first.no;
        rec.span = first.start..first.start + first.len;
        rec.terminator = first.bytes.len() - first.content_len();
        rec.raw.clear();
        rec.values.clear();
        rec.fields.clear();
        let is_comment = first.bytes.first() == Some(&b'#');
        if first.overlong {
            return Ok(Some(if is_comment {
                Event::Skipped
            } else {
                Event::Broken(Broken::Overlong)
            }));
        }
        let content = &first.bytes[..first.content_len()];
        if is_comment || content.iter().all(|b| matches!(b, b' ' | b'\t' | b'\r')) {
            return Ok(Some(Event::Skipped));
        }
        rec.raw.extend_from_slice(content);
        // Lines taken into a quoted field, given back if it never closes.
        let mut taken: Vec<Line> = Vec::new();
        let mut last_terminator = first.bytes[content.len()..].to_vec();
        let mut pos = 0usize;
        let broken = 'fields: loop {
            let raw_start = pos;
            let value_start = rec.values.len();
            let mut p = pos;
            while p < rec.raw.len() && matches!(rec.raw[p], b' ' | b'\t') {
                p += 1;
            }
            if p < rec.raw.len() && rec.raw[p] == b'"' {
                // A quoted field.
                let field = rec.fields.len();
                let value_from = rec.values.len();
                p += 1;
                loop {
                    match rec.raw[p..].iter().position(|b| *b == b'"') {
                        Some(q) => {
                            let q = p + q;
                            rec.values.extend_from_slice(&rec.raw[p..q]);
                            if rec.raw.get(q + 1) == Some(&b'"') {
                                rec.values.push(b'"');
                                p = q + 2;
                                continue;
                            }
                            // The closing quote: only spaces may follow before a comma or the end.
                            let mut e = q + 1;
                            while e < rec.raw.len() && matches!(rec.raw[e], b' ' | b'\t') {
                                e += 1;
                            }
                            if e < rec.raw.len() && rec.raw[e] != b',' {
                                break 'fields Some(if taken.is_empty() {
                                    Broken::AfterQuote { field }
                                } else {
                                    Broken::Unclosed { field }
                                });
                            }
                            p = e;
                            break;
                        }
                        None => {
                            rec.values.extend_from_slice(&rec.raw[p..]);
                            // The field goes on over the line's end.
                            if rec.values.len() - value_from > MAX_FIELD_BYTES {
                                break 'fields Some(Broken::Unclosed { field });
                            }
                            let Some(next) = self.read_line()? else {
                                break 'fields Some(Broken::Unclosed { field });
                            };
                            if next.overlong {
                                taken.push(next);
                                break 'fields Some(Broken::Unclosed { field });
                            }
                            rec.values.extend_from_slice(&last_terminator);
                            rec.raw.extend_from_slice(&last_terminator);
                            p = rec.raw.len();
                            let c = next.content_len();
                            rec.raw.extend_from_slice(&next.bytes[..c]);
                            last_terminator = next.bytes[c..].to_vec();
                            taken.push(next);
                        }
                    }
                }
            } else {
                let end = rec.raw[p..]
                    .iter()
                    .position(|b| *b == b',')
                    .map_or(rec.raw.len(), |i| p + i);
                rec.values.extend_from_slice(&rec.raw[p..end]);
                p = end;
            }
            let value_end = rec.values.len();
            rec.fields.push((value_start..value_end, raw_start..p));
            if p < rec.raw.len() && rec.raw[p] == b',' {
                pos = p + 1;
                continue;
            }
            break None;
        };
        match broken {
            None => {
                let end = rec.span.start + rec.raw.len() as u64 + last_terminator.len() as u64;
                rec.span = rec.span.start..end;
                rec.terminator = last_terminator.len();
                Ok(Some(Event::Record))
            }
            Some(b) => {
                // Only the first line is consumed; the rest is read again.
                for l in taken.into_iter().rev() {
                    self.ahead.push_front(l);
                }
                rec.span = first.start..first.start + first.len;
                rec.terminator = first.bytes.len() - first.content_len();
                rec.raw.clear();
                rec.values.clear();
                rec.fields.clear();
                Ok(Some(Event::Broken(b)))
            }
        }
    }
}

/// Where a target's row sits in the file it was read from.
#[derive(Debug, Clone)]
pub struct RowRef {
    /// The file's layout.
    pub layout: Arc<Layout>,
    /// Index of the row among the layout's items.
    pub item: usize,
}

/// One piece of a CSV file's layout.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Item {
    /// Text kept as it is: comments, blank lines, refused rows.
    Verbatim(Range<usize>),
    /// The header row (its content, then its terminator).
    Header(Range<usize>, Range<usize>),
    /// A row that became a target: its content, its terminator, and each field's raw text.
    Row {
        /// The row's text without its terminator.
        content: Range<usize>,
        /// Its terminator (may be empty at the end of the file).
        terminator: Range<usize>,
        /// Each field's raw text, quotes included.
        fields: Vec<Range<usize>>,
    },
}

/// A CSV file as written: its text and its pieces in order, so a save can
/// write back comments, column order, refused rows and unchanged rows byte for
/// byte.
#[derive(Debug, Clone, PartialEq)]
pub struct Layout {
    /// The file's text.
    pub text: String,
    /// The header's column names (lower case, trimmed), in file order.
    pub columns: Vec<String>,
    /// The pieces, in file order.
    pub items: Vec<Item>,
    /// The line terminator new rows get (that of the header).
    pub newline: String,
}

impl Layout {
    /// The text of a range.
    pub fn at(&self, r: &Range<usize>) -> &str {
        self.text.get(r.clone()).unwrap_or("")
    }
}

/// Quote a field for CSV when it needs it (a comma, a quote, a line break,
/// spaces at either end, or `#` at the start of a line's first field).
pub fn quote(v: &str, first: bool) -> String {
    // Beyond RFC 4180 (`output::csv_field`): spaces at the ends and a `#`
    // that would make the line a comment are kept by quotes too.
    let edges =
        v.starts_with([' ', '\t']) || v.ends_with([' ', '\t']) || (first && v.starts_with('#'));
    if edges {
        crate::output::csv_quoted(v)
    } else {
        crate::output::csv_field(v).into_owned()
    }
}

/// The value of a field from its raw text (spaces around it and its quotes
/// removed, `""` read as a quote), as [`Record::value`] gives it.
pub fn unquote(raw: &str) -> String {
    let t = raw.trim_matches([' ', '\t']);
    match t.strip_prefix('"').and_then(|r| r.strip_suffix('"')) {
        Some(inner) => inner
            .replace("\"\"", "\"")
            .trim_matches([' ', '\t'])
            .to_string(),
        None => t.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn events(text: &str) -> Vec<(usize, Event, Vec<String>)> {
        let mut r = Records::new(text.as_bytes());
        let mut rec = Record::default();
        let mut out = Vec::new();
        while let Some(e) = r.next_into(&mut rec).unwrap() {
            let f = (0..rec.len())
                .map(|i| rec.value(i).unwrap().to_string())
                .collect();
            out.push((rec.line, e, f));
        }
        out
    }

    #[test]
    fn quoted_fields_comments_and_blank_lines() {
        let e =
            events("# c\nname, ra\n\n\"a, b\" , \"say \"\"hi\"\"\"\r\nx,\"two\nlines\"\nlast,\n");
        assert_eq!(e[0].1, Event::Skipped);
        assert_eq!(e[1].2, ["name", "ra"]);
        assert_eq!(e[2].1, Event::Skipped);
        assert_eq!(e[3].2, ["a, b", "say \"hi\""]);
        assert_eq!(
            (e[4].0, e[4].2.clone()),
            (5, vec!["x".into(), "two\nlines".into()])
        );
        assert_eq!(
            (e[5].0, e[5].2.clone()),
            (7, vec!["last".into(), "".into()])
        );
        assert_eq!(e.len(), 6);
    }

    #[test]
    fn an_unclosed_quote_swallows_nothing() {
        let e = events("n,notes\nA,\"open\nB,fine\nC,\"ok\"\n");
        assert_eq!(e[1].1, Event::Broken(Broken::Unclosed { field: 1 }));
        assert_eq!(e[1].0, 2);
        assert_eq!(e[2].2, ["B", "fine"]);
        assert_eq!(e[3].2, ["C", "ok"]);
        let e = events("n,notes\nA,\"x\"y\nB,1\n");
        assert_eq!(e[1].1, Event::Broken(Broken::AfterQuote { field: 1 }));
        assert_eq!(e[2].2, ["B", "1"]);
        let e = events("n,notes\nA,12\"\n");
        assert_eq!(e[1].2, ["A", "12\""]);
    }

    #[test]
    fn spans_cover_the_text() {
        let text = "a,b\n# c\nx,\"1\n2\"\ny,3";
        let mut r = Records::new(text.as_bytes());
        let mut rec = Record::default();
        let mut spans = Vec::new();
        while r.next_into(&mut rec).unwrap().is_some() {
            spans.push(rec.span.clone());
        }
        assert_eq!(spans, [0..4, 4..8, 8..16, 16..19]);
    }
}
