//! The target form: every field of the fields table as text, shown for the
//! kinds that use it, validated by the same reader that loads targets files
//! (`rung::io::kinds::target_from_pairs`). The text typed is kept on the
//! target, so a save writes it as typed (`10:00:00` stays sexagesimal).

use crate::io::kinds::{AsWritten, COLUMNS, Kind, Target, Ty, Written, column, target_from_pairs};
use crate::io::write_targets::field_text;
use std::sync::Arc;

/// What a field is, in words, with its unit (shown beside it).
pub fn field_hint(key: &str) -> &'static str {
    column(key).map_or("", |c| c.about)
}

/// The choices of a choice field (kind, band), if it is one.
pub fn choices(key: &str) -> Option<Vec<&'static str>> {
    match column(key)?.ty {
        Ty::Kind => Some(crate::io::kinds::KINDS.iter().map(|k| k.name).collect()),
        Ty::Choice(list) => Some(list.to_vec()),
        _ => None,
    }
}

/// An open form.
#[derive(Debug, Clone, PartialEq)]
pub struct Form {
    /// The name of the target being edited, or `None` for a new one.
    pub editing: Option<String>,
    /// Text of every field of the fields table, in its order.
    pub values: Vec<(&'static str, String)>,
    /// Index of the focused field among [`Form::visible`].
    pub focus: usize,
    /// The last validation failure: field and message.
    pub error: Option<(String, String)>,
    /// The target as it was when the form opened (edits only).
    pub original: Option<Target>,
}

/// Degrees as the form shows them: at most 9 decimals (≈ 4 µas), trailing zeros dropped.
pub fn degrees_text(v: f64) -> String {
    let t = format!("{v:.9}");
    let t = t.trim_end_matches('0').trim_end_matches('.');
    if t == "-0" { "0".into() } else { t.to_string() }
}

/// The text the form opens with for one field of a target: as written when
/// that still holds, else the value (angles to 9 decimals).
fn opening_text(t: &Target, key: &str) -> String {
    let text = field_text(t, key);
    match key {
        "ra" if t.written.text("ra") != Some(text.as_str()) => degrees_text(t.ra_deg),
        "dec" if t.written.text("dec") != Some(text.as_str()) => degrees_text(t.dec_deg),
        _ => text,
    }
}

impl Form {
    /// A form for a new target.
    pub fn blank() -> Self {
        let mut f = Self::from_target(&Target::plain("", 0.0, 0.0));
        f.editing = None;
        f.original = None;
        for (c, v) in f.values.iter_mut() {
            if *c == "ra" || *c == "dec" {
                v.clear();
            }
        }
        f
    }

    /// A form holding a target's values.
    pub fn from_target(t: &Target) -> Self {
        Form {
            editing: Some(t.name.clone()),
            values: COLUMNS
                .iter()
                .map(|c| (c.key, opening_text(t, c.key)))
                .collect(),
            focus: 0,
            error: None,
            original: Some(t.clone()),
        }
    }

    /// The kind the form currently says (plain when unreadable).
    pub fn kind(&self) -> Kind {
        Kind::parse(self.value("kind")).unwrap_or(crate::io::kinds::DEFAULT_KIND)
    }

    /// The text of a field.
    pub fn value(&self, key: &str) -> &str {
        self.values
            .iter()
            .find(|(c, _)| *c == key)
            .map(|(_, v)| v.as_str())
            .unwrap_or("")
    }

    fn value_mut(&mut self, key: &str) -> Option<&mut String> {
        self.values
            .iter_mut()
            .find(|(c, _)| *c == key)
            .map(|(_, v)| v)
    }

    /// The fields shown for the current kind, in order.
    pub fn visible(&self) -> Vec<&'static str> {
        let k = self.kind();
        COLUMNS
            .iter()
            .map(|c| c.key)
            .filter(|c| k.uses(c))
            .collect()
    }

    /// The focused field.
    pub fn focused(&self) -> &'static str {
        let v = self.visible();
        v[self.focus.min(v.len() - 1)]
    }

    /// Move the focus by `d` fields (wrapping).
    pub fn move_focus(&mut self, d: i32) {
        let n = self.visible().len() as i32;
        self.focus = ((self.focus as i32 + d).rem_euclid(n)) as usize;
    }

    /// Type a character into the focused field.
    pub fn type_char(&mut self, c: char) {
        let col = self.focused();
        if let Some(v) = self.value_mut(col) {
            v.push(c);
        }
        self.error = None;
    }

    /// Delete the last character of the focused field.
    pub fn backspace(&mut self) {
        let col = self.focused();
        if let Some(v) = self.value_mut(col) {
            v.pop();
        }
        self.error = None;
    }

    /// Step a choice field (kind, band) by `d`.
    pub fn cycle(&mut self, d: i32) {
        let col = self.focused();
        let Some(opts) = choices(col) else {
            return;
        };
        let cur = self.value(col).trim().to_string();
        let i = opts
            .iter()
            .position(|o| o.eq_ignore_ascii_case(&cur))
            .map(|i| i as i32)
            .unwrap_or(-1);
        let n = opts.len() as i32;
        let next = (i + d).rem_euclid(n) as usize;
        if let Some(v) = self.value_mut(col) {
            *v = opts[next].to_string();
        }
        // Keep the focus on the field when the visible set changes.
        self.focus = self.visible().iter().position(|c| *c == col).unwrap_or(0);
        self.error = None;
    }

    /// Check the form: the target it describes, or the field and what is wrong.
    /// Fields the kind does not use keep their values (hidden), so switching a
    /// kind back and forth loses nothing and a save drops nothing.
    pub fn check(&self, others: &[Target]) -> Result<Target, (String, String)> {
        let fields: Vec<(String, String)> = self
            .values
            .iter()
            .map(|(c, v)| (c.to_string(), v.clone()))
            .collect();
        let mut t = target_from_pairs(&fields, true)?;
        if let Some(o) = &self.original {
            let opened = Form::from_target(o);
            // Unchanged coordinates keep their exact value (the text may show 9 decimals).
            if self.value("ra") == opened.value("ra") {
                t.ra_deg = o.ra_deg;
            }
            if self.value("dec") == opened.value("dec") {
                t.dec_deg = o.dec_deg;
            }
            // Keep the row the target came from, and fields the form does not show.
            let mut typed = t.written.0.as_deref().cloned().unwrap_or_default();
            if let Some(w) = o.written.0.as_deref() {
                typed.row = w.row.clone();
                typed.fields.extend(
                    w.fields
                        .iter()
                        .filter(|(k, _)| column(k).is_none())
                        .cloned(),
                );
            }
            t.written = Written(Some(Arc::new(AsWritten { ..typed })));
        }
        if others
            .iter()
            .any(|o| o.name == t.name && Some(&o.name) != self.editing.as_ref())
        {
            return Err((
                "name".into(),
                format!("'{}' is already in the programme", t.name),
            ));
        }
        Ok(t)
    }

    /// Put the focus on a field (after a validation failure).
    pub fn focus_on(&mut self, key: &str) {
        if let Some(i) = self.visible().iter().position(|c| *c == key) {
            self.focus = i;
        }
    }
}
