//! The Budget view's request form: the hours asked, the range and the folder
//! its exports go to. It only reads and checks text; the budget itself is
//! the library's (`plan::budget`).

use crate::error::RungError;
use crate::plan::budget::Asked;
use crate::programme::Settings;
use chrono::NaiveDate;
use std::path::PathBuf;

/// The fields: label and hint.
pub const FIELDS: [(&str, &str); 4] = [
    (
        "hours asked",
        "40 · 2027A=20,2027B=15 · 12 nights · empty: none",
    ),
    ("from", "first night, YYYY-MM-DD"),
    ("to", "last night, YYYY-MM-DD"),
    ("export to", "folder for x (budget files)"),
];

/// What the Budget view asks of the budget: the hours asked (none: no
/// allocation) and the folder its exports go to.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct BudgetAsk {
    /// The hours asked.
    pub asked: Option<Asked>,
    /// Where `x` writes the budget's files (the working folder at first).
    pub export_dir: PathBuf,
}

/// The form being filled in.
#[derive(Debug, Clone, PartialEq)]
pub struct AskForm {
    /// The text of each field, in [`FIELDS`] order.
    pub fields: [String; 4],
    /// The field with the cursor.
    pub focus: usize,
    /// The field refused and why.
    pub error: Option<(usize, String)>,
}

/// The hours asked as the form writes them.
pub fn asked_text(a: &Option<Asked>) -> String {
    let Some(a) = a else {
        return String::new();
    };
    if let Some(h) = a.hours {
        return format!("{h}");
    }
    if let Some(n) = a.nights {
        return format!("{n} nights");
    }
    a.hours_per_semester
        .iter()
        .map(|(k, h)| {
            if k == "*" {
                format!("{h}")
            } else {
                format!("{k}={h}")
            }
        })
        .collect::<Vec<_>>()
        .join(",")
}

/// The hours asked in words: "30 h", "2027A 20 h, 2027B 15 h", "12 nights".
pub fn asked_words(a: &Asked) -> String {
    let n = |x: f64| crate::output::num(x, 1);
    if let Some(h) = a.hours {
        return format!("{} h", n(h));
    }
    if let Some(x) = a.nights {
        return format!("{} nights", n(x));
    }
    a.hours_per_semester
        .iter()
        .map(|(k, h)| {
            if k == "*" {
                format!("{} h a semester", n(*h))
            } else {
                format!("{k} {} h", n(*h))
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// Read the hours asked: empty (none), `H`, `LABEL=H,...` or `N nights` (`N n`).
pub fn parse_asked(text: &str) -> Result<Option<Asked>, String> {
    let t = text.trim();
    if t.is_empty() {
        return Ok(None);
    }
    let lower = t.to_lowercase();
    let nights = lower
        .strip_suffix("nights")
        .or_else(|| lower.strip_suffix("night"))
        .or_else(|| lower.strip_suffix('n'));
    let a = if let Some(n) = nights {
        let n: f64 = n
            .trim()
            .parse()
            .map_err(|_| format!("'{t}' is not a number of nights"))?;
        Asked {
            nights: Some(n),
            ..Default::default()
        }
    } else if t.contains('=') || t.contains(',') {
        Asked {
            hours_per_semester: Asked::parse_per_semester(t).map_err(form_why)?,
            ..Default::default()
        }
    } else {
        let h: f64 = t.trim_end_matches('h').trim().parse().map_err(|_| {
            format!("'{t}' is not hours (40), hours per semester (2027A=20) or nights (12 nights)")
        })?;
        Asked {
            hours: Some(h),
            ..Default::default()
        }
    };
    a.check().map_err(form_why)?;
    Ok(Some(a))
}

/// A refusal in the form's words: the form names its field itself, so the
/// library's name for the value (a command-line option such as `--hours`)
/// is left out.
fn form_why(e: RungError) -> String {
    match e {
        RungError::Invalid { why, .. } => why,
        RungError::Parse { text, why, .. } => format!("cannot read '{text}': {why}"),
        other => other.to_string(),
    }
}

impl AskForm {
    /// The form for the current request and settings.
    pub fn new(ask: &BudgetAsk, settings: &Settings) -> Self {
        AskForm {
            fields: [
                asked_text(&ask.asked),
                settings.from.to_string(),
                settings.to.to_string(),
                ask.export_dir.display().to_string(),
            ],
            focus: 0,
            error: None,
        }
    }

    /// Type a character into the focused field.
    pub fn type_char(&mut self, c: char) {
        if !c.is_control() && self.fields[self.focus].chars().count() < 4096 {
            self.fields[self.focus].push(c);
            self.error = None;
        }
    }

    /// Remove the focused field's last character.
    pub fn backspace(&mut self) {
        self.fields[self.focus].pop();
        self.error = None;
    }

    /// Move the cursor by `by` fields (wrapping).
    pub fn move_focus(&mut self, by: i32) {
        let n = FIELDS.len() as i32;
        self.focus = ((self.focus as i32 + by).rem_euclid(n)) as usize;
    }

    /// Check every field: the hours asked, a range the budget may span and
    /// whose semesters hold the ones asked, a folder (or a place one may be
    /// made). The error names the field.
    #[allow(clippy::type_complexity)]
    pub fn check(
        &self,
        settings: &Settings,
    ) -> Result<(Option<Asked>, Settings, PathBuf), (usize, String)> {
        let asked = parse_asked(&self.fields[0]).map_err(|e| (0, e))?;
        let date = |i: usize| -> Result<NaiveDate, (usize, String)> {
            crate::astro::time::parse_date(self.fields[i].trim()).map_err(|e| (i, e.to_string()))
        };
        let (from, to) = (date(1)?, date(2)?);
        let st = if (from, to) == (settings.from, settings.to) {
            settings.clone()
        } else {
            settings
                .with_range(from, to)
                .map_err(|e| (2, e.to_string()))?
        };
        if let Some(a) = &asked {
            a.check_semesters(&st).map_err(|e| (0, form_why(e)))?;
        }
        let dir = PathBuf::from(self.fields[3].trim());
        if dir.as_os_str().is_empty() {
            return Err((3, "give a folder".into()));
        }
        if dir.exists() && !dir.is_dir() {
            return Err((3, format!("{} is a file, not a folder", dir.display())));
        }
        Ok((asked, st, dir))
    }
}
