//! Colours and text attributes. The palette is the colour-blind-safe set of
//! Okabe & Ito (2008, "Color Universal Design"), as 256-colour indices, and no
//! meaning rests on colour alone: every coloured mark also has its own glyph or
//! label. With `NO_COLOR` set (no-color.org) only bold, reverse and underline are used.

use ratatui::style::{Color, Modifier, Style};

/// The styles of one run.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Theme {
    /// Whether colours may be used.
    pub color: bool,
}

/// Okabe–Ito orange.
const ORANGE: Color = Color::Indexed(214);
/// Okabe–Ito sky blue.
const SKY: Color = Color::Indexed(117);
/// Okabe–Ito blue.
const BLUE: Color = Color::Indexed(32);
/// Okabe–Ito yellow.
const YELLOW: Color = Color::Indexed(227);
/// Okabe–Ito vermillion.
const VERMILLION: Color = Color::Indexed(166);
/// Okabe–Ito reddish purple.
const PURPLE: Color = Color::Indexed(175);
/// Okabe–Ito bluish green.
const GREEN: Color = Color::Indexed(36);

impl Theme {
    /// Colours unless `NO_COLOR` is set to a non-empty value.
    pub fn from_env() -> Self {
        let no = std::env::var_os("NO_COLOR").is_some_and(|v| !v.is_empty());
        Theme { color: !no }
    }
    fn c(&self, fg: Color) -> Style {
        if self.color {
            Style::new().fg(fg)
        } else {
            Style::new()
        }
    }
    /// Plain text.
    pub fn text(&self) -> Style {
        Style::new()
    }
    /// Headings and the active tab.
    pub fn title(&self) -> Style {
        self.c(SKY).add_modifier(Modifier::BOLD)
    }
    /// Column headers.
    pub fn header(&self) -> Style {
        Style::new().add_modifier(Modifier::UNDERLINED | Modifier::BOLD)
    }
    /// The selected row.
    pub fn selected(&self) -> Style {
        Style::new().add_modifier(Modifier::REVERSED)
    }
    /// Less important text.
    pub fn dim(&self) -> Style {
        if self.color {
            Style::new().fg(Color::Indexed(245))
        } else {
            Style::new().add_modifier(Modifier::DIM)
        }
    }
    /// Cautions (Sun) and errors: always bold as well.
    pub fn warn(&self) -> Style {
        self.c(VERMILLION).add_modifier(Modifier::BOLD)
    }
    /// Notices (unsaved changes, live mode).
    pub fn notice(&self) -> Style {
        self.c(ORANGE).add_modifier(Modifier::BOLD)
    }
    /// Good news (saved).
    pub fn good(&self) -> Style {
        self.c(GREEN).add_modifier(Modifier::BOLD)
    }
    /// The selected target's altitude curve.
    pub fn series_target(&self) -> Style {
        self.c(YELLOW).add_modifier(Modifier::BOLD)
    }
    /// The Moon's track.
    pub fn series_moon(&self) -> Style {
        self.c(PURPLE)
    }
    /// The minimum-altitude line.
    pub fn limit(&self) -> Style {
        self.c(ORANGE)
    }
    /// The current-time marker.
    pub fn now(&self) -> Style {
        self.c(SKY).add_modifier(Modifier::BOLD)
    }
    /// Season cells.
    pub fn hours(&self, h: f64) -> Style {
        if !self.color {
            return Style::new();
        }
        if h <= 0.0 {
            Style::new().fg(Color::Indexed(240))
        } else if h < 3.0 {
            Style::new().fg(SKY)
        } else {
            Style::new().fg(BLUE)
        }
    }
    /// Background of a chart column by Sun altitude (glyph strip carries the same).
    pub fn sky_band(&self, sun_alt_deg: f64) -> Style {
        if !self.color {
            return Style::new();
        }
        let idx = if sun_alt_deg > -0.833 {
            24
        } else if sun_alt_deg > -6.0 {
            23
        } else if sun_alt_deg > -12.0 {
            18
        } else if sun_alt_deg > -18.0 {
            17
        } else {
            16
        };
        Style::new().bg(Color::Indexed(idx))
    }
}

/// Glyph of the twilight strip: day, civil, nautical, astronomical, dark.
pub fn band_glyph(sun_alt_deg: f64) -> char {
    if sun_alt_deg > -0.833 {
        '█'
    } else if sun_alt_deg > -6.0 {
        '▓'
    } else if sun_alt_deg > -12.0 {
        '▒'
    } else if sun_alt_deg > -18.0 {
        '░'
    } else {
        ' '
    }
}

/// Glyph of a season cell by observable hours.
pub fn hours_glyph(h: f64) -> char {
    if h <= 0.0 {
        '·'
    } else if h < 1.0 {
        '▁'
    } else if h < 3.0 {
        '▃'
    } else if h < 5.0 {
        '▅'
    } else if h < 7.0 {
        '▇'
    } else {
        '█'
    }
}

/// A shape for each kind, so kinds differ without colour (the kinds table's glyph).
pub fn kind_glyph(k: crate::io::targets::Kind) -> char {
    k.glyph()
}
