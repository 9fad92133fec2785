//! The target form: every field as text, validated by the same reader that
//! loads targets files (`rung::io::targets::target_from_fields`).

use crate::io::targets::{BANDS, Kind, Target, target_from_fields};
use crate::io::write_targets::{COLUMNS, field_text, kind_uses};

/// Kinds in the order the form cycles through them.
pub const KINDS: [Kind; 4] = [Kind::Parallax, Kind::Pulsator, Kind::Transient, Kind::Plain];

/// What a field is, in words, with its unit (shown beside it).
pub fn field_hint(column: &str) -> &'static str {
    match column {
        "name" => "unique name",
        "kind" => "←/→ to choose",
        "ra" => "ICRS, degrees or hh:mm:ss",
        "dec" => "ICRS, degrees or ±dd:mm:ss",
        "parallax_mas" => "expected parallax, mas",
        "pm_ra_masyr" => "μα cos δ, mas/yr",
        "pm_dec_masyr" => "μδ, mas/yr",
        "epoch_yr" => "epoch of position, Julian year",
        "mag" => "magnitude in band",
        "band" => "←/→ to choose",
        "period_d" => "period, days",
        "epoch_max_bjd" => "maximum light, BJD_TDB",
        "period_err_d" => "period error, days",
        "amplitude_mag" => "peak to peak, mag",
        "mean_mag" => "mean magnitude",
        "discovered" => "ISO 8601 UTC",
        "peak_mag" => "expected peak, mag",
        "mag_now" => "at discovery, mag",
        "redshift" => "z",
        "extinction_mag" => "foreground, mag",
        "goal_pct" => "distance goal σd/d, %",
        "priority" => "higher first",
        "notes" => "free text",
        _ => "",
    }
}

/// An open form.
#[derive(Debug, Clone, PartialEq)]
pub struct Form {
    /// The name of the target being edited, or `None` for a new one.
    pub editing: Option<String>,
    /// Text of every column (see [`COLUMNS`]).
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

impl Form {
    /// A form for a new target.
    pub fn blank() -> Self {
        let mut t = Target::plain("", 0.0, 0.0);
        t.name.clear();
        let mut f = Self::from_target(&t);
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
                .map(|c| match *c {
                    "ra" => (*c, degrees_text(t.ra_deg)),
                    "dec" => (*c, degrees_text(t.dec_deg)),
                    _ => (*c, field_text(t, c)),
                })
                .collect(),
            focus: 0,
            error: None,
            original: Some(t.clone()),
        }
    }

    /// The kind the form currently says (plain when unreadable).
    pub fn kind(&self) -> Kind {
        Kind::parse(self.value("kind")).unwrap_or(Kind::Plain)
    }

    /// The text of a column.
    pub fn value(&self, column: &str) -> &str {
        self.values
            .iter()
            .find(|(c, _)| *c == column)
            .map(|(_, v)| v.as_str())
            .unwrap_or("")
    }

    fn value_mut(&mut self, column: &str) -> Option<&mut String> {
        self.values
            .iter_mut()
            .find(|(c, _)| *c == column)
            .map(|(_, v)| v)
    }

    /// The columns shown for the current kind, in order.
    pub fn visible(&self) -> Vec<&'static str> {
        let k = self.kind();
        COLUMNS
            .iter()
            .copied()
            .filter(|c| kind_uses(k, c))
            .collect()
    }

    /// The focused column.
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
        let opts: Vec<String> = match col {
            "kind" => KINDS.iter().map(|k| k.as_str().to_string()).collect(),
            "band" => BANDS.iter().map(|b| b.to_string()).collect(),
            _ => return,
        };
        let cur = self.value(col).trim().to_ascii_lowercase();
        let i = opts
            .iter()
            .position(|o| o.to_ascii_lowercase() == cur)
            .map(|i| i as i32)
            .unwrap_or(-1);
        let n = opts.len() as i32;
        let next = (i + d).rem_euclid(n) as usize;
        if let Some(v) = self.value_mut(col) {
            *v = opts[next].clone();
        }
        // Keep the focus on the kind field when the visible set changes.
        if col == "kind" {
            self.focus = self
                .visible()
                .iter()
                .position(|c| *c == "kind")
                .unwrap_or(0);
        }
        self.error = None;
    }

    /// Check the form: the target it describes, or the field and what is wrong.
    /// Fields the kind does not use are not kept.
    pub fn check(&self, others: &[Target]) -> Result<Target, (String, String)> {
        let k = self.kind();
        let fields: Vec<(String, String)> = self
            .values
            .iter()
            .filter(|(c, _)| kind_uses(k, c) || *c == "kind")
            .map(|(c, v)| (c.to_string(), v.clone()))
            .collect();
        if Kind::parse(self.value("kind")).is_none() {
            return Err((
                "kind".into(),
                format!(
                    "'{}' is not one of parallax, pulsator, transient, plain",
                    self.value("kind")
                ),
            ));
        }
        let mut t = target_from_fields(&fields)?;
        // Unchanged coordinates keep their exact value (the text shows 9 decimals).
        if let Some(o) = &self.original {
            if self.value("ra") == degrees_text(o.ra_deg) {
                t.ra_deg = o.ra_deg;
            }
            if self.value("dec") == degrees_text(o.dec_deg) {
                t.dec_deg = o.dec_deg;
            }
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

    /// Put the focus on a column (after a validation failure).
    pub fn focus_on(&mut self, column: &str) {
        if let Some(i) = self.visible().iter().position(|c| *c == column) {
            self.focus = i;
        }
    }
}
