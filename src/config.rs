//! One reader for rung's configuration files (TOML): the site catalogue, the
//! instruments, the bands and every distance method's coefficients.
//!
//! Each file exists twice: built in (`config/NAME.toml`, compiled into the
//! program) and, optionally, in the user config folder ([`user_config_dir`]).
//! The user's file is merged over the built-in one:
//!
//! - a **catalogue** (`[[site]]`, `[[instrument]]`, `[[band]]` entries) merges
//!   by name: an entry with a known name (case-insensitive) replaces the
//!   built-in entry in place, a new name is added after them. Two entries
//!   with one name inside one file are refused, naming both lines.
//! - a **settings table** (a method's coefficients, the twilight model) merges
//!   key by key: the user's file may set one key and keep the rest.
//!
//! Every error names the file, the line and the field (the dotted key), so a
//! tired observer can mend it at once; a key the program does not know is
//! refused, not ignored.

use crate::error::{Location, Result, RungError, line_at};
use serde::de::DeserializeOwned;
use std::path::{Path, PathBuf};

/// A configuration file rung knows: its name in `config/` and in the user
/// config folder, and its built-in text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ConfigFile {
    /// File name, e.g. `sites.toml`.
    pub name: &'static str,
    /// The built-in text (`config/<name>`), compiled in.
    pub builtin: &'static str,
}

/// The site catalogue.
pub const SITES: ConfigFile = ConfigFile {
    name: "sites.toml",
    builtin: include_str!("../config/sites.toml"),
};
/// The instrument profiles.
pub const INSTRUMENTS: ConfigFile = ConfigFile {
    name: "instruments.toml",
    builtin: include_str!("../config/instruments.toml"),
};
/// The photometric bands and the twilight model.
pub const BANDS: ConfigFile = ConfigFile {
    name: "bands.toml",
    builtin: include_str!("../config/bands.toml"),
};
/// The parallax method's coefficients.
pub const PARALLAX: ConfigFile = ConfigFile {
    name: "parallax.toml",
    builtin: include_str!("../config/parallax.toml"),
};
/// The pulsating-star method's coefficients.
pub const PULSATOR: ConfigFile = ConfigFile {
    name: "pulsator.toml",
    builtin: include_str!("../config/pulsator.toml"),
};
/// Fields: host galaxies and clusters whose pulsators share a pointing.
pub const FIELD: ConfigFile = ConfigFile {
    name: "field.toml",
    builtin: include_str!("../config/field.toml"),
};
/// The transient method's coefficients.
pub const TRANSIENT: ConfigFile = ConfigFile {
    name: "transient.toml",
    builtin: include_str!("../config/transient.toml"),
};
/// The user's default programme settings (no built-in text: the built-in
/// defaults are in `crate::programme`).
pub const SETTINGS: ConfigFile = ConfigFile {
    name: "settings.toml",
    builtin: "",
};

/// The user's config folder for rung: `$RUNG_CONFIG_DIR` when set, else the
/// platform's (`~/.config/rung` on Linux).
pub fn user_config_dir() -> Option<PathBuf> {
    if let Ok(d) = std::env::var("RUNG_CONFIG_DIR") {
        return Some(PathBuf::from(d));
    }
    directories::ProjectDirs::from("org", "rung", "rung").map(|p| p.config_dir().to_path_buf())
}

/// One layer of a configuration: a text and the file it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct Layer {
    /// The TOML text.
    pub text: String,
    /// Where it came from (named in errors).
    pub file: PathBuf,
}

impl Layer {
    /// A layer from a text and its file name.
    pub fn new(text: impl Into<String>, file: impl Into<PathBuf>) -> Self {
        Layer {
            text: text.into(),
            file: file.into(),
        }
    }

    /// Read a file as a layer; the error names the file.
    pub fn read(path: &Path) -> Result<Self> {
        let text = std::fs::read_to_string(path).map_err(|e| RungError::io(path, e))?;
        Ok(Layer::new(text, path))
    }

    /// An error at the dotted key `field` of this layer (the line where the key
    /// is set, else the line of its table, else none).
    pub fn error_at(&self, field: &str, msg: impl Into<String>) -> RungError {
        RungError::InFile {
            loc: Location {
                file: Some(self.file.clone()),
                line: key_line(&self.text, field),
                field: Some(field.to_string()),
            },
            msg: msg.into(),
        }
    }

    fn table(&self) -> Result<toml::Table> {
        self.text
            .parse::<toml::Table>()
            .map_err(|e| RungError::InFile {
                loc: Location {
                    file: Some(self.file.clone()),
                    line: e.span().map(|s| line_at(&self.text, s.start)),
                    field: None,
                },
                msg: crate::error::one_line_cut(e.message().trim(), 600),
            })
    }

    /// A type or unknown-key error of a text that is TOML: the line and the key.
    fn typed(&self, e: &toml::de::Error) -> RungError {
        let line = e.span().map(|s| line_at(&self.text, s.start));
        RungError::InFile {
            loc: Location {
                file: Some(self.file.clone()),
                line,
                field: line
                    .and_then(|l| field_at_line(&self.text, l))
                    .or_else(|| quoted_field(e.message())),
            },
            msg: crate::error::one_line_cut(e.message().trim(), 600),
        }
    }
}

impl ConfigFile {
    /// Where the built-in text is named in errors.
    pub fn builtin_path(&self) -> PathBuf {
        Path::new("config").join(self.name)
    }

    /// The built-in layer.
    pub fn builtin_layer(&self) -> Layer {
        Layer::new(self.builtin, self.builtin_path())
    }

    /// The user's file (in [`user_config_dir`]), whether or not it exists.
    pub fn user_path(&self) -> Option<PathBuf> {
        user_config_dir().map(|d| d.join(self.name))
    }

    /// The user's layer, when the user has this file.
    pub fn user_layer(&self) -> Result<Option<Layer>> {
        match self.user_path() {
            Some(p) if p.exists() => Layer::read(&p).map(Some),
            _ => Ok(None),
        }
    }

    /// The layers to merge, lowest first: built in, then the user's file,
    /// then `extra` (a file named on the command line).
    pub fn layers(&self, extra: Option<&Path>) -> Result<Vec<Layer>> {
        let mut out = Vec::new();
        if !self.builtin.is_empty() {
            out.push(self.builtin_layer());
        }
        if let Some(u) = self.user_layer()? {
            out.push(u);
        }
        if let Some(p) = extra {
            out.push(Layer::read(p)?);
        }
        Ok(out)
    }
}

/// Parse one text into `T`; a syntax or type error names the file, the line
/// and the key.
pub fn parse<T: DeserializeOwned>(layer: &Layer) -> Result<T> {
    // A text that is not TOML at all is reported by line only; a value of the
    // wrong type or an unknown key names the key too.
    layer.table()?;
    toml::from_str(&layer.text).map_err(|e| layer.typed(&e))
}

/// A settings table merged key by key over `layers` (lowest first), then
/// read into `T` and checked by `check`. An error names the topmost layer
/// that sets the key at fault (its file and line), so a user's mistake is
/// reported in the user's file.
///
/// `check` reports a bad value as `RungError::Invalid { what: dotted key, .. }`.
pub fn merged<T: DeserializeOwned>(
    layers: &[Layer],
    check: impl FnOnce(T) -> Result<T>,
) -> Result<T> {
    let top = layers
        .last()
        .ok_or_else(|| RungError::invalid("configuration", "no file to read"))?;
    let mut base = toml::Table::new();
    for l in layers {
        merge_tables(&mut base, l.table()?);
    }
    let text =
        toml::to_string(&base).map_err(|e| top.error_at("", format!("cannot merge: {e}")))?;
    let merged = Layer::new(text, top.file.clone());
    let blame = |field: Option<String>, msg: String| -> RungError {
        let field = field.unwrap_or_default();
        let layer = layers
            .iter()
            .rev()
            .find(|l| !field.is_empty() && key_line(&l.text, &field).is_some())
            .unwrap_or(top);
        let mut e = layer.error_at(&field, msg);
        if field.is_empty()
            && let RungError::InFile { loc, .. } = &mut e
        {
            loc.field = None;
            loc.line = None;
        }
        e
    };
    let value: T = match toml::from_str(&merged.text) {
        Ok(v) => v,
        Err(e) => {
            let field = e
                .span()
                .and_then(|s| field_at_line(&merged.text, line_at(&merged.text, s.start)))
                .or_else(|| quoted_field(e.message()));
            return Err(blame(
                field,
                crate::error::one_line_cut(e.message().trim(), 600),
            ));
        }
    };
    check(value).map_err(|e| match e {
        RungError::Invalid { what, why } => blame(Some(what), why),
        other => other,
    })
}

/// Something with a catalogue name.
pub trait Named {
    /// The name (unique in a catalogue, compared without regard to case).
    fn name(&self) -> &str;
}

/// The entries of the `[[table]]` array of one layer, each read as `R` and
/// made into a `T` by `convert` (which reports a bad value as
/// `RungError::Invalid { what: key, .. }`). Errors name the file, the line of
/// the key (or of the entry) and the key; two entries with one name are
/// refused, naming both lines.
pub fn entries<R: DeserializeOwned, T: Named>(
    layer: &Layer,
    table: &str,
    rows: Vec<R>,
    convert: impl Fn(R) -> Result<T>,
) -> Result<Vec<T>> {
    let headers = header_lines(&layer.text, table);
    let mut out: Vec<(usize, T)> = Vec::with_capacity(rows.len());
    for (i, r) in rows.into_iter().enumerate() {
        let header = headers.get(i).copied();
        let t = convert(r).map_err(|e| match e {
            RungError::Invalid { what, why } => RungError::InFile {
                loc: Location {
                    file: Some(layer.file.clone()),
                    line: header
                        .and_then(|h| entry_key_line(&layer.text, h, table, &what))
                        .or(header),
                    field: Some(what),
                },
                msg: why,
            },
            other => other,
        })?;
        let line = header.unwrap_or(0);
        if let Some((first, _)) = out
            .iter()
            .find(|(_, x)| x.name().eq_ignore_ascii_case(t.name()))
        {
            return Err(RungError::InFile {
                loc: Location {
                    file: Some(layer.file.clone()),
                    line: header
                        .and_then(|h| key_line_in_block(&layer.text, h, "name"))
                        .or(header),
                    field: Some("name".into()),
                },
                msg: format!(
                    "{table} '{}' is named twice in this file (first at line {first}); rename or remove one",
                    t.name()
                ),
            });
        }
        out.push((line, t));
    }
    Ok(out.into_iter().map(|(_, t)| t).collect())
}

/// Merge `over` into `base` by name: an entry whose name (any case) is in
/// `base` replaces it where it stands, a new one is appended.
pub fn merge_by_name<T: Named>(base: &mut Vec<T>, over: Vec<T>) {
    for t in over {
        match base
            .iter()
            .position(|b| b.name().eq_ignore_ascii_case(t.name()))
        {
            Some(i) => base[i] = t,
            None => base.push(t),
        }
    }
}

/// An entry of a catalogue by name: exact first, then without regard to case;
/// the error lists the names known.
pub fn find<'a, T: Named>(all: &'a [T], what: &str, name: &str, tail: &str) -> Result<&'a T> {
    let n = name.trim();
    all.iter()
        .find(|x| x.name() == n)
        .or_else(|| all.iter().find(|x| x.name().eq_ignore_ascii_case(n)))
        .ok_or_else(|| RungError::Unknown {
            what: what.to_string(),
            name: name.to_string(),
            hint: format!(
                "; known {what}s: {}{tail}",
                all.iter().map(|x| x.name()).collect::<Vec<_>>().join(", ")
            ),
        })
}

/// Merge `over` into `base`: tables recursively, other values replaced.
pub fn merge_tables(base: &mut toml::Table, over: toml::Table) {
    for (k, v) in over {
        match (base.get_mut(&k), v) {
            (Some(toml::Value::Table(b)), toml::Value::Table(o)) => merge_tables(b, o),
            (_, v) => {
                base.insert(k, v);
            }
        }
    }
}

/// The line of the key `field` of the array entry whose `[[table]]` header is
/// on line `header`: `aperture_m` in the entry's own lines, `throughput.V` in
/// its `[table.throughput]` sub-table.
fn entry_key_line(text: &str, header: usize, table: &str, field: &str) -> Option<usize> {
    let Some((sub, key)) = field.rsplit_once('.') else {
        return key_line_in_block(text, header, field);
    };
    let want = format!("{table}.{sub}");
    let sub_header = text
        .lines()
        .enumerate()
        .skip(header)
        .map_while(|(i, l)| match header_name(l) {
            Some(h) if l.trim_start().starts_with("[[") && h == table => None,
            h => Some((i, h)),
        })
        .find(|(_, h)| h.as_deref() == Some(want.as_str()))
        .map(|(i, _)| i + 1)?;
    key_line_in_block(text, sub_header, key)
}

/// 1-based lines of the `[[table]]` headers of an array of tables (spaces
/// inside the brackets allowed: `[[ site ]]`).
pub fn header_lines(text: &str, table: &str) -> Vec<usize> {
    text.lines()
        .enumerate()
        .filter(|(_, l)| {
            l.trim_start().starts_with("[[") && header_name(l).is_some_and(|h| h == table)
        })
        .map(|(i, _)| i + 1)
        .collect()
}

/// Whether `line` sets the key `key` (`key = …` or `key=…`).
fn sets_key(line: &str, key: &str) -> bool {
    let l = line.trim_start();
    let l = l
        .strip_prefix(key)
        .or_else(|| l.strip_prefix(&format!("\"{key}\"")));
    l.is_some_and(|rest| rest.trim_start().starts_with('='))
}

/// The table a header line opens (`[a.b]` → `a.b`, `[[site]]` → `site`).
fn header_name(line: &str) -> Option<String> {
    let l = line.trim();
    if !l.starts_with('[') {
        return None;
    }
    let inner = l.split('#').next()?.trim();
    Some(
        inner
            .trim_matches(|c| c == '[' || c == ']')
            .trim()
            .to_string(),
    )
}

/// The line of `key` between header line `header` (1-based) and the next header.
fn key_line_in_block(text: &str, header: usize, key: &str) -> Option<usize> {
    text.lines()
        .enumerate()
        .skip(header)
        .take_while(|(_, l)| header_name(l).is_none())
        .find(|(_, l)| sets_key(l, key))
        .map(|(i, _)| i + 1)
}

/// The 1-based line where the dotted key `field` is set in a TOML text
/// (`defaults.bins`: the `bins =` line under `[defaults]`; a table's own
/// name: its header line).
pub fn key_line(text: &str, field: &str) -> Option<usize> {
    if field.is_empty() {
        return None;
    }
    let (table, key) = match field.rsplit_once('.') {
        Some((t, k)) => (t, k),
        None => ("", field),
    };
    let mut current = String::new();
    for (i, l) in text.lines().enumerate() {
        if let Some(h) = header_name(l) {
            if h == field {
                return Some(i + 1);
            }
            current = h;
            continue;
        }
        if current == table && sets_key(l, key) {
            return Some(i + 1);
        }
        // A dotted key written inline under a parent table (`band.V.a = …`).
        if !table.is_empty() && current.is_empty() && sets_key(l, field) {
            return Some(i + 1);
        }
    }
    None
}

/// The dotted key set on 1-based line `line` of a TOML text (`defaults.bins`).
fn field_at_line(text: &str, line: usize) -> Option<String> {
    let lines: Vec<&str> = text.lines().collect();
    let here = lines.get(line.checked_sub(1)?)?;
    if let Some(h) = header_name(here) {
        return (!h.is_empty()).then_some(h);
    }
    let key = here.split('=').next()?.trim().trim_matches('"');
    if key.is_empty() {
        return None;
    }
    // Keys of an array entry (`[[site]]`) are named bare, as the entry's own fields.
    let table = lines[..line - 1]
        .iter()
        .rev()
        .find(|l| header_name(l).is_some())
        .filter(|l| !l.trim_start().starts_with("[["))
        .and_then(|l| header_name(l));
    Some(match table {
        Some(t) if !t.is_empty() => format!("{t}.{key}"),
        _ => key.to_string(),
    })
}

/// A field named in backquotes in a parser's message (`missing field `snr``).
fn quoted_field(msg: &str) -> Option<String> {
    let a = msg.find('`')?;
    let b = msg[a + 1..].find('`')?;
    Some(msg[a + 1..a + 1 + b].to_string())
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde::Deserialize;

    #[derive(Debug, Deserialize, PartialEq)]
    #[serde(deny_unknown_fields)]
    struct Cfg {
        a: f64,
        inner: Inner,
    }
    #[derive(Debug, Deserialize, PartialEq)]
    #[serde(deny_unknown_fields)]
    struct Inner {
        b: u32,
        c: String,
    }

    fn check(c: Cfg) -> Result<Cfg> {
        if c.inner.b == 0 {
            return Err(RungError::invalid("inner.b", "must be at least 1"));
        }
        Ok(c)
    }

    const BASE: &str = "# built in\na = 1.0\n\n[inner]\nb = 2\nc = \"x\"\n";

    #[test]
    fn user_layer_merges_key_by_key() {
        let l = [
            Layer::new(BASE, "config/t.toml"),
            Layer::new("[inner]\nb = 5\n", "user/t.toml"),
        ];
        let c: Cfg = merged(&l, check).unwrap();
        assert_eq!(c.a, 1.0);
        assert_eq!(c.inner.b, 5);
        assert_eq!(c.inner.c, "x");
    }

    #[test]
    fn errors_name_the_users_file_line_and_key() {
        let user = "# mine\n\n[inner]\nb = 0\n";
        let l = [
            Layer::new(BASE, "config/t.toml"),
            Layer::new(user, "user/t.toml"),
        ];
        let e = merged(&l, check).unwrap_err().to_string();
        assert_eq!(
            e,
            "user/t.toml, line 4, field 'inner.b': must be at least 1"
        );
        // A wrong type, an unknown key, a syntax error.
        let bad_type = [
            Layer::new(BASE, "config/t.toml"),
            Layer::new("\n[inner]\nc = 3\n", "user/t.toml"),
        ];
        let e = merged::<Cfg>(&bad_type, Ok).unwrap_err().to_string();
        assert!(e.starts_with("user/t.toml, line 3, field 'inner.c'"), "{e}");
        let unknown = [
            Layer::new(BASE, "config/t.toml"),
            Layer::new("\n\n[inner]\nd = 3\n", "user/t.toml"),
        ];
        let e = merged::<Cfg>(&unknown, Ok).unwrap_err().to_string();
        assert!(
            e.starts_with("user/t.toml, line 4, field 'inner.d'") && e.contains("unknown field"),
            "{e}"
        );
        let syntax = [
            Layer::new(BASE, "config/t.toml"),
            Layer::new("a = 1\nb = = 2\n", "user/t.toml"),
        ];
        let e = merged::<Cfg>(&syntax, Ok).unwrap_err().to_string();
        assert!(e.starts_with("user/t.toml, line 2"), "{e}");
    }

    #[derive(Debug, Deserialize)]
    struct Row {
        name: String,
        v: f64,
    }
    #[derive(Debug, PartialEq)]
    struct Item {
        name: String,
        v: f64,
    }
    impl Named for Item {
        fn name(&self) -> &str {
            &self.name
        }
    }
    #[derive(Debug, Deserialize)]
    struct File {
        #[serde(default)]
        item: Vec<Row>,
    }

    fn read(text: &str, file: &str) -> Result<Vec<Item>> {
        let l = Layer::new(text, file);
        let f: File = parse(&l)?;
        entries(&l, "item", f.item, |r| {
            if r.v < 0.0 {
                return Err(RungError::invalid("v", format!("{} is negative", r.v)));
            }
            Ok(Item {
                name: r.name,
                v: r.v,
            })
        })
    }

    #[test]
    fn catalogue_entries_merge_by_name_and_refuse_twins() {
        let mut base = read(
            "[[item]]\nname = \"a\"\nv = 1\n\n[[item]]\nname = \"b\"\nv = 2\n",
            "config/i.toml",
        )
        .unwrap();
        let user = read(
            "[[item]]\nname = \"B\"\nv = 20\n[[item]]\nname = \"c\"\nv = 3\n",
            "u.toml",
        )
        .unwrap();
        merge_by_name(&mut base, user);
        let names: Vec<_> = base.iter().map(|i| (i.name.as_str(), i.v)).collect();
        assert_eq!(names, [("a", 1.0), ("B", 20.0), ("c", 3.0)]);
        assert_eq!(find(&base, "item", "b", "").unwrap().v, 20.0);
        let e = find(&base, "item", "zz", "").unwrap_err().to_string();
        assert!(e.contains("known items: a, B, c"), "{e}");

        let twins = "[[item]]\nname = \"a\"\nv = 1\n\n[[item]]\n# again\nname = \"A\"\nv = 2\n";
        let e = read(twins, "u.toml").unwrap_err().to_string();
        assert_eq!(
            e,
            "u.toml, line 7, field 'name': item 'A' is named twice in this file (first at line 1); rename or remove one"
        );
        let bad = "[[item]]\nname = \"a\"\nv = 1\n\n[[item]]\nname = \"b\"\n\nv = -1\n";
        let e = read(bad, "u.toml").unwrap_err().to_string();
        assert_eq!(e, "u.toml, line 8, field 'v': -1 is negative");
    }

    #[test]
    fn key_lines() {
        let t = "a = 1\n[band.V]\na = 2\n[defaults]\nbins = 3\n";
        assert_eq!(key_line(t, "a"), Some(1));
        assert_eq!(key_line(t, "band.V.a"), Some(3));
        assert_eq!(key_line(t, "defaults.bins"), Some(5));
        assert_eq!(key_line(t, "defaults"), Some(4));
        assert_eq!(key_line(t, "defaults.harmonics"), None);
        assert_eq!(field_at_line(t, 5).as_deref(), Some("defaults.bins"));
    }
}
