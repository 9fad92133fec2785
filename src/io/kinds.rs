//! What a target is: the kinds of target and the fields of a targets file,
//! one table each.
//!
//! - [`KINDS`] (written through the `kinds!` macro, so that the [`Kind`] enum
//!   and its row are the same line): the kind's name, its glyph, and the
//!   fields it adds with which of them are required.
//! - [`COLUMNS`]: every field of a targets file, with its unit, what it is,
//!   how its text is read, its default, its bounds, and where it lives on
//!   [`Target`].
//!
//! The CSV and TOML readers ([`crate::io::targets`]), the programme writer
//! ([`crate::io::write_targets`]), the UI's target form and the theme's glyphs
//! all read these two tables and nothing else. A new distance method is one
//! row in `kinds!`; a new field is one row in [`COLUMNS`] (with its field on
//! [`Target`]) and its name in the rows of the kinds that use it.

use crate::astro::frames::CatalogPlace;
use crate::astro::time::{Instant, VALID_FROM_JD, VALID_TO_JD, parse_instant};
use crate::io::angles::{parse_dec_deg, parse_ra_deg};
use serde::Serialize;
use std::sync::Arc;

/// Earliest accepted catalogue epoch `epoch_yr` (Julian year, TT); rung's valid span starts 1960-01-01.
pub const VALID_FROM_EPOCH_YR: f64 = 1960.0;
/// Latest accepted catalogue epoch `epoch_yr` (Julian year, TT); rung's valid span ends with 2099.
pub const VALID_TO_EPOCH_YR: f64 = 2100.0;
pub use crate::io::csv_text::MAX_FIELD_BYTES;
/// Photometric bands a target may name (the `band` field's choices): the
/// optical U B V R I and the near-infrared J H K.
pub const BANDS: [&str; 8] = ["U", "B", "V", "R", "I", "J", "H", "K"];
/// Classes of pulsator (the `class` field's choices); each picks its
/// period–luminosity relations (`config/pulsator.toml`).
pub const PULSATOR_CLASSES: [&str; 3] = ["cepheid", "rrlyrae", "mira"];

/// Whether a field must be given.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Need {
    /// May be left empty.
    Optional,
    /// Must be given; the text is what a refusal says (after the field's name).
    Required(&'static str),
    /// At least one of these fields must be given; the refusal names the
    /// first and says the text.
    OneOf(&'static [&'static str], &'static str),
}

/// One row of the kinds table.
#[derive(Debug, Clone, Copy)]
pub struct KindSpec {
    /// The kind.
    pub kind: Kind,
    /// Its name in files, on the command line and in JSON.
    pub name: &'static str,
    /// A shape that tells the kinds apart without colour.
    pub glyph: char,
    /// What the kind is for, in a few words.
    pub about: &'static str,
    /// The fields the kind adds to those of every kind, in form order, with
    /// which are required.
    pub fields: &'static [(&'static str, Need)],
}

/// Declares [`Kind`] and [`KINDS`] from one row per kind, so the two never differ.
macro_rules! kinds {
    ($($(#[$doc:meta])* $variant:ident = $name:literal, $glyph:literal, $about:literal, $fields:expr;)+) => {
        /// Which distance method a target is for (one per row of [`KINDS`]).
        #[derive(
            Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, serde::Deserialize, PartialOrd, Ord,
        )]
        pub enum Kind {
            $($(#[$doc])* #[serde(rename = $name)] $variant,)+
        }

        /// The kinds table: one row per kind of target, in the order the form
        /// offers them and error messages list them.
        pub const KINDS: &[KindSpec] = &[
            $(KindSpec { kind: Kind::$variant, name: $name, glyph: $glyph, about: $about, fields: $fields },)+
        ];
    };
}

use Need::{OneOf, Optional, Required};

kinds! {
    /// Trigonometric parallax.
    Parallax = "parallax", '◆', "trigonometric parallax", &[
        ("parallax_mas", Required("is required for a parallax target")),
        ("parallax_err_mas", Optional),
        ("pm_ra_masyr", Optional),
        ("pm_dec_masyr", Optional),
        ("epoch_yr", Optional),
        ("mag", Optional),
        ("color_vi_mag", Optional),
        ("ref_star_count", Optional),
        ("ref_mag", Optional),
        ("ref_color_vi_mag", Optional),
    ];
    /// Pulsating star (period–luminosity).
    Pulsator = "pulsator", '∿', "pulsating star, period-luminosity distance", &[
        ("period_d", Required("is required for a pulsator")),
        ("epoch_max_bjd", Required("is required for a pulsator (BJD_TDB of a maximum)")),
        ("period_err_d", Optional),
        ("amplitude_mag", Optional),
        ("parallax_mas", Optional),
        ("parallax_err_mas", Optional),
        ("mean_mag", Optional),
        ("extinction_mag", Optional),
        ("class", Optional),
        ("feh_dex", Optional),
        ("feh_err_dex", Optional),
        ("field", Optional),
        ("maxima_bjd", Optional),
    ];
    /// Thermonuclear supernova (standardized candle).
    Transient = "transient", '✶', "thermonuclear supernova, standardized candle", &[
        ("discovered", Required("is required for a transient (ISO 8601 time)")),
        ("peak_mag", OneOf(&["peak_mag", "mag_now"], "a transient needs peak_mag or mag_now")),
        ("mag_now", Optional),
        ("redshift", Optional),
        ("extinction_mag", Optional),
        ("bands", Optional),
        ("classification", Optional),
        ("host_mu_mag", Optional),
        ("host_mu_err_mag", Optional),
        ("host", Optional),
        ("peak_err_mag", Optional),
    ];
    /// A host galaxy or cluster: the field its pulsators share (one pointing
    /// serves them; their distances combine into the field's).
    Field = "field", '◎', "host galaxy or cluster: one pointing, one distance from its pulsators", &[
        ("feh_dex", Optional),
        ("feh_err_dex", Optional),
    ];
    /// Visibility only.
    Plain = "plain", '○', "visibility only", &[("mag", Optional)];
}

/// The kind a target has when its file does not say.
pub const DEFAULT_KIND: Kind = Kind::Plain;

impl Kind {
    /// The kind's row of [`KINDS`].
    pub fn spec(self) -> &'static KindSpec {
        // Every variant has its row: the macro writes both from the same line.
        KINDS
            .iter()
            .find(|k| k.kind == self)
            .unwrap_or(&KINDS[KINDS.len() - 1])
    }
    /// Parse the `kind` field (any case; empty is [`DEFAULT_KIND`]).
    pub fn parse(s: &str) -> Option<Kind> {
        let s = s.trim();
        if s.is_empty() {
            return Some(DEFAULT_KIND);
        }
        KINDS
            .iter()
            .find(|k| k.name.eq_ignore_ascii_case(s))
            .map(|k| k.kind)
    }
    /// The lower-case name.
    pub fn as_str(&self) -> &'static str {
        self.spec().name
    }
    /// The kind's glyph (the theme draws kinds with it).
    pub fn glyph(&self) -> char {
        self.spec().glyph
    }
    /// Whether targets of this kind use `field` (every kind uses the common
    /// fields; the form shows only these).
    pub fn uses(&self, field: &str) -> bool {
        column(field).is_some_and(|c| c.every_kind)
            || self.spec().fields.iter().any(|(f, _)| *f == field)
    }
    /// The names of all kinds, for messages: "parallax, pulsator, transient, field, plain".
    pub fn names() -> String {
        KINDS.iter().map(|k| k.name).collect::<Vec<_>>().join(", ")
    }
}

/// A bound on a number, with what a refusal says (after the field's name).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bound {
    /// Smallest value (or `-inf`).
    pub min: f64,
    /// Largest value (or `inf`).
    pub max: f64,
    /// Whether `min` itself is refused.
    pub min_open: bool,
    /// Whether `max` itself is refused.
    pub max_open: bool,
    /// What a refusal says.
    pub why: &'static str,
    /// The physical bound this is ([`crate::bounds`], shared with the
    /// command-line options): its refusal names the value, the range and the reason.
    pub physical: Option<&'static crate::bounds::Bound>,
}

impl Bound {
    /// `min ≤ v ≤ max`.
    pub const fn within(min: f64, max: f64, why: &'static str) -> Bound {
        Bound {
            min,
            max,
            min_open: false,
            max_open: false,
            why,
            physical: None,
        }
    }
    /// A bound from physics, as [`crate::bounds`] holds it.
    pub const fn physical(b: &'static crate::bounds::Bound) -> Bound {
        Bound {
            min: b.min,
            max: b.max,
            min_open: b.min_exclusive,
            max_open: false,
            why: b.why,
            physical: Some(b),
        }
    }
    /// What a refusal of `v` says.
    pub fn refusal(&self, v: f64) -> String {
        match self.physical.and_then(|p| p.why_not(v)) {
            Some(why) => why,
            None => self.why.to_string(),
        }
    }
    /// `v > min`.
    pub const fn above(min: f64, why: &'static str) -> Bound {
        Bound {
            min,
            max: f64::INFINITY,
            min_open: true,
            max_open: false,
            why,
            physical: None,
        }
    }
    /// `v ≥ min`.
    pub const fn at_least(min: f64, why: &'static str) -> Bound {
        Bound::within(min, f64::INFINITY, why)
    }
    /// `v ≤ max`.
    pub const fn at_most(max: f64, why: &'static str) -> Bound {
        Bound::within(f64::NEG_INFINITY, max, why)
    }
    /// The same bound with `max` refused.
    pub const fn below_max(self) -> Bound {
        Bound {
            max_open: true,
            ..self
        }
    }
    /// Whether `v` is inside.
    pub fn admits(&self, v: f64) -> bool {
        let lo = if self.min_open {
            v > self.min
        } else {
            v >= self.min
        };
        let hi = if self.max_open {
            v < self.max
        } else {
            v <= self.max
        };
        lo && hi
    }
}

/// How a field's text is read.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Ty {
    /// Free text (trimmed).
    Text,
    /// A finite decimal number.
    Number,
    /// Right ascension (degrees or hours, see [`crate::io::angles`]), read as degrees.
    Ra,
    /// Declination, degrees.
    Dec,
    /// An ISO 8601 instant.
    Time,
    /// One of [`KINDS`].
    Kind,
    /// One of a list (any case; kept as the list writes it).
    Choice(&'static [&'static str]),
}

/// The value of one field of one target.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    /// Not given.
    Empty,
    /// A number.
    Num(f64),
    /// Text.
    Text(String),
    /// An instant.
    Time(Instant),
    /// A kind.
    Kind(Kind),
}

impl Cell {
    /// An optional number.
    pub fn num_or_empty(v: Option<f64>) -> Cell {
        v.map_or(Cell::Empty, Cell::Num)
    }
    /// The number, if this is one.
    pub fn num(&self) -> Option<f64> {
        match self {
            Cell::Num(x) => Some(*x),
            _ => None,
        }
    }
    /// The text (empty unless this is text).
    pub fn text(self) -> String {
        match self {
            Cell::Text(s) => s,
            _ => String::new(),
        }
    }
    /// The instant, if this is one.
    pub fn time(&self) -> Option<Instant> {
        match self {
            Cell::Time(t) => Some(*t),
            _ => None,
        }
    }
    /// Whether nothing is given.
    pub fn is_empty(&self) -> bool {
        match self {
            Cell::Empty => true,
            Cell::Text(s) => s.is_empty(),
            _ => false,
        }
    }
}

/// One row of the fields table.
#[derive(Debug, Clone, Copy)]
pub struct Column {
    /// The field's name: the CSV column header and the TOML key.
    pub key: &'static str,
    /// Its unit or form, for the docs and the form ("" when it has none).
    pub unit: &'static str,
    /// What it is, in a few words (shown beside it in the form).
    pub about: &'static str,
    /// How its text is read.
    pub ty: Ty,
    /// The text read when the field is empty ("" for none).
    pub default: &'static str,
    /// Bounds a number must keep, checked in order.
    pub bounds: &'static [Bound],
    /// Whether every kind uses it (else the kinds table says which).
    pub every_kind: bool,
    /// Whether every kind requires it.
    pub need: Need,
    /// Its value on a target.
    pub get: fn(&Target) -> Cell,
    /// Put a value read from a file on a target.
    pub set: fn(&mut Target, Cell),
}

// The physical bounds are rung::bounds's, shared with the command-line options.
const MAGNITUDE: Bound = Bound::physical(&crate::bounds::MAG);
const NOT_NEGATIVE: Bound = Bound::at_least(0.0, "must not be negative");
const PROPER_MOTION: Bound = Bound::physical(&crate::bounds::PM_MASYR);
const COLOUR_VI: Bound = Bound::physical(&crate::bounds::COLOUR_VI_MAG);

/// The fields table: every field of a targets file, in the order a new file
/// writes them. Column order in a file is free; names are matched without
/// regard to case.
pub const COLUMNS: &[Column] = &[
    Column {
        key: "name",
        unit: "text",
        about: "unique name",
        ty: Ty::Text,
        default: "",
        bounds: &[],
        every_kind: true,
        need: Required("is missing or empty"),
        get: |t| Cell::Text(t.name.clone()),
        set: |t, c| t.name = c.text(),
    },
    Column {
        key: "kind",
        unit: "name",
        about: "←/→ to choose",
        ty: Ty::Kind,
        default: "plain",
        bounds: &[],
        every_kind: true,
        need: Optional,
        get: |t| Cell::Kind(t.kind),
        set: |t, c| {
            if let Cell::Kind(k) = c {
                t.kind = k
            }
        },
    },
    Column {
        key: "ra",
        unit: "ICRS degrees or hours (hh:mm:ss)",
        about: "ICRS, degrees or hh:mm:ss",
        ty: Ty::Ra,
        default: "",
        bounds: &[],
        every_kind: true,
        need: Required("is missing"),
        get: |t| Cell::Num(t.ra_deg),
        set: |t, c| t.ra_deg = c.num().unwrap_or(0.0),
    },
    Column {
        key: "dec",
        unit: "ICRS degrees (±dd:mm:ss)",
        about: "ICRS, degrees or ±dd:mm:ss",
        ty: Ty::Dec,
        default: "",
        bounds: &[],
        every_kind: true,
        need: Required("is missing"),
        get: |t| Cell::Num(t.dec_deg),
        set: |t, c| t.dec_deg = c.num().unwrap_or(0.0),
    },
    Column {
        key: "parallax_mas",
        unit: "mas",
        about: "expected parallax, mas",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::physical(&crate::bounds::PARALLAX_MAS)],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.parallax_mas),
        set: |t, c| t.parallax_mas = c.num(),
    },
    Column {
        key: "parallax_err_mas",
        unit: "mas",
        about: "a measured parallax's error (the ladder takes it as given)",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::above(0.0, "must be positive: a parallax error of zero would fix the ladder by itself")],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.parallax_err_mas),
        set: |t, c| t.parallax_err_mas = c.num(),
    },
    Column {
        key: "pm_ra_masyr",
        unit: "mas/yr",
        about: "μα cos δ, mas/yr",
        ty: Ty::Number,
        default: "0",
        bounds: &[PROPER_MOTION],
        every_kind: false,
        need: Optional,
        get: |t| Cell::Num(t.pm_ra_masyr),
        set: |t, c| t.pm_ra_masyr = c.num().unwrap_or(0.0),
    },
    Column {
        key: "pm_dec_masyr",
        unit: "mas/yr",
        about: "μδ, mas/yr",
        ty: Ty::Number,
        default: "0",
        bounds: &[PROPER_MOTION],
        every_kind: false,
        need: Optional,
        get: |t| Cell::Num(t.pm_dec_masyr),
        set: |t, c| t.pm_dec_masyr = c.num().unwrap_or(0.0),
    },
    Column {
        key: "epoch_yr",
        unit: "Julian year",
        about: "epoch of position, Julian year",
        ty: Ty::Number,
        default: "2000.0",
        bounds: &[Bound::within(
            VALID_FROM_EPOCH_YR,
            VALID_TO_EPOCH_YR,
            "must be a Julian year within rung's valid span, 1960.0 to 2100.0",
        )],
        every_kind: false,
        need: Optional,
        get: |t| Cell::Num(t.epoch_yr),
        set: |t, c| t.epoch_yr = c.num().unwrap_or(2000.0),
    },
    Column {
        key: "mag",
        unit: "mag",
        about: "magnitude in band",
        ty: Ty::Number,
        default: "",
        bounds: &[MAGNITUDE],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.mag),
        set: |t, c| t.mag = c.num(),
    },
    Column {
        key: "band",
        unit: "U B V R I J H K",
        about: "←/→ to choose",
        ty: Ty::Choice(&BANDS),
        default: "V",
        bounds: &[],
        every_kind: true,
        need: Optional,
        get: |t| Cell::Text(t.band.clone()),
        set: |t, c| t.band = c.text(),
    },
    Column {
        key: "color_vi_mag",
        unit: "mag",
        about: "V−I colour (DCR)",
        ty: Ty::Number,
        default: "",
        bounds: &[COLOUR_VI],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.color_vi_mag),
        set: |t, c| t.color_vi_mag = c.num(),
    },
    Column {
        key: "ref_star_count",
        unit: "count",
        about: "reference stars in the frame",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::physical(&crate::bounds::REF_STAR_COUNT)],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.ref_star_count),
        set: |t, c| t.ref_star_count = c.num(),
    },
    Column {
        key: "ref_mag",
        unit: "mag",
        about: "their typical mag in band",
        ty: Ty::Number,
        default: "",
        bounds: &[MAGNITUDE],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.ref_mag),
        set: |t, c| t.ref_mag = c.num(),
    },
    Column {
        key: "ref_color_vi_mag",
        unit: "mag",
        about: "their mean V−I colour",
        ty: Ty::Number,
        default: "",
        bounds: &[COLOUR_VI],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.ref_color_vi_mag),
        set: |t, c| t.ref_color_vi_mag = c.num(),
    },
    Column {
        key: "period_d",
        unit: "d",
        about: "period, days",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::physical(&crate::bounds::PERIOD_D)],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.period_d),
        set: |t, c| t.period_d = c.num(),
    },
    Column {
        key: "epoch_max_bjd",
        unit: "BJD_TDB",
        about: "maximum light, BJD_TDB",
        ty: Ty::Number,
        default: "",
        bounds: &[
            Bound::within(
                2_400_000.0,
                2_500_000.0,
                "must be a full BJD such as 2461000.123",
            ),
            Bound::within(
                VALID_FROM_JD,
                VALID_TO_JD,
                "must lie within rung's valid span 1960-01-01 to 2099-12-31 (BJD 2436934.5 to 2488069.5)",
            )
            .below_max(),
        ],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.epoch_max_bjd),
        set: |t, c| t.epoch_max_bjd = c.num(),
    },
    Column {
        key: "period_err_d",
        unit: "d",
        about: "period error, days",
        ty: Ty::Number,
        default: "",
        bounds: &[NOT_NEGATIVE],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.period_err_d),
        set: |t, c| t.period_err_d = c.num(),
    },
    Column {
        key: "amplitude_mag",
        unit: "mag",
        about: "peak to peak, mag",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::physical(&crate::bounds::AMPLITUDE_MAG)],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.amplitude_mag),
        set: |t, c| t.amplitude_mag = c.num(),
    },
    Column {
        key: "mean_mag",
        unit: "mag",
        about: "mean magnitude",
        ty: Ty::Number,
        default: "",
        bounds: &[MAGNITUDE],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.mean_mag),
        set: |t, c| t.mean_mag = c.num(),
    },
    Column {
        key: "class",
        unit: "cepheid rrlyrae mira",
        about: "picks the relation; empty: inferred from the period",
        ty: Ty::Choice(&PULSATOR_CLASSES),
        default: "",
        bounds: &[],
        every_kind: false,
        need: Optional,
        get: |t| text_or_empty(&t.class),
        set: |t, c| t.class = c.text(),
    },
    Column {
        key: "feh_dex",
        unit: "dex",
        about: "metallicity [Fe/H], dex",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::physical(&crate::bounds::FEH_DEX)],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.feh_dex),
        set: |t, c| t.feh_dex = c.num(),
    },
    Column {
        key: "feh_err_dex",
        unit: "dex",
        about: "its uncertainty, dex",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::physical(&crate::bounds::FEH_ERR_DEX)],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.feh_err_dex),
        set: |t, c| t.feh_err_dex = c.num(),
    },
    Column {
        key: "field",
        unit: "name",
        about: "host galaxy or cluster: a target of kind field",
        ty: Ty::Text,
        default: "",
        bounds: &[],
        every_kind: false,
        need: Optional,
        get: |t| text_or_empty(&t.field),
        set: |t, c| t.field = c.text(),
    },
    Column {
        key: "maxima_bjd",
        unit: "BJD_TDB list",
        about: "observed times of maximum, BJD[:err_d] …; refit the ephemeris",
        ty: Ty::Text,
        default: "",
        bounds: &[],
        every_kind: false,
        need: Optional,
        get: |t| text_or_empty(&t.maxima_bjd),
        set: |t, c| t.maxima_bjd = c.text(),
    },
    Column {
        key: "discovered",
        unit: "ISO 8601",
        about: "ISO 8601 UTC",
        ty: Ty::Time,
        default: "",
        bounds: &[],
        every_kind: false,
        need: Optional,
        get: |t| t.discovered.map_or(Cell::Empty, Cell::Time),
        set: |t, c| t.discovered = c.time(),
    },
    Column {
        key: "peak_mag",
        unit: "mag",
        about: "expected peak, mag",
        ty: Ty::Number,
        default: "",
        bounds: &[MAGNITUDE],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.peak_mag),
        set: |t, c| t.peak_mag = c.num(),
    },
    Column {
        key: "mag_now",
        unit: "mag",
        about: "at discovery, mag",
        ty: Ty::Number,
        default: "",
        bounds: &[MAGNITUDE],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.mag_now),
        set: |t, c| t.mag_now = c.num(),
    },
    Column {
        key: "redshift",
        unit: "z",
        about: "z",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::physical(&crate::bounds::REDSHIFT)],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.redshift),
        set: |t, c| t.redshift = c.num(),
    },
    Column {
        key: "extinction_mag",
        unit: "mag",
        about: "foreground, mag",
        ty: Ty::Number,
        default: "0",
        bounds: &[Bound::physical(&crate::bounds::EXTINCTION_MAG)],
        every_kind: false,
        need: Optional,
        get: |t| Cell::Num(t.extinction_mag),
        set: |t, c| t.extinction_mag = c.num().unwrap_or(0.0),
    },
    Column {
        key: "bands",
        unit: "band list",
        about: "chase bands, B first, e.g. B V R",
        ty: Ty::Text,
        default: "",
        bounds: &[],
        every_kind: false,
        need: Optional,
        get: |t| text_or_empty(&t.bands),
        set: |t, c| t.bands = c.text(),
    },
    Column {
        key: "classification",
        unit: "class",
        about: "spectroscopic class (Ia); empty: a candidate",
        ty: Ty::Text,
        default: "",
        bounds: &[],
        every_kind: false,
        need: Optional,
        get: |t| text_or_empty(&t.classification),
        set: |t, c| t.classification = c.text(),
    },
    Column {
        key: "host_mu_mag",
        unit: "mag",
        about: "host's own distance modulus (a calibrator)",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::within(
            15.0,
            45.0,
            "is not a host distance modulus: 15 mag is 10 kpc, 45 mag 10 Gpc",
        )],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.host_mu_mag),
        set: |t, c| t.host_mu_mag = c.num(),
    },
    Column {
        key: "host_mu_err_mag",
        unit: "mag",
        about: "its uncertainty, mag",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::within(
            0.0,
            5.0,
            "is not an uncertainty of a distance modulus (0 to 5 mag)",
        )],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.host_mu_err_mag),
        set: |t, c| t.host_mu_err_mag = c.num(),
    },
    Column {
        key: "host",
        unit: "name",
        about: "the field the host distance comes from (a calibrator)",
        ty: Ty::Text,
        default: "",
        bounds: &[],
        every_kind: false,
        need: Optional,
        get: |t| text_or_empty(&t.host),
        set: |t, c| t.host = c.text(),
    },
    Column {
        key: "peak_err_mag",
        unit: "mag",
        about: "a supernova already observed: its fitted peak's error (the ladder takes it as given)",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::within(
            0.0,
            2.0,
            "is not the error of a fitted peak (above 0, at most 2 mag)",
        )
        .open_min()],
        every_kind: false,
        need: Optional,
        get: |t| Cell::num_or_empty(t.peak_err_mag),
        set: |t, c| t.peak_err_mag = c.num(),
    },
    Column {
        key: "goal_pct",
        unit: "%",
        about: "distance goal σd/d, %",
        ty: Ty::Number,
        default: "",
        bounds: &[Bound::within(
            0.0,
            100.0,
            "must be a percentage in (0, 100]",
        )
        .open_min()],
        every_kind: true,
        need: Optional,
        get: |t| Cell::num_or_empty(t.goal_pct),
        set: |t, c| t.goal_pct = c.num(),
    },
    Column {
        key: "priority",
        unit: "number",
        about: "higher first",
        ty: Ty::Number,
        default: "1",
        bounds: &[],
        every_kind: true,
        need: Optional,
        get: |t| Cell::Num(t.priority),
        set: |t, c| t.priority = c.num().unwrap_or(1.0),
    },
    Column {
        key: "notes",
        unit: "text",
        about: "free text",
        ty: Ty::Text,
        default: "",
        bounds: &[],
        every_kind: true,
        need: Optional,
        get: |t| Cell::Text(t.notes.clone()),
        set: |t, c| t.notes = c.text(),
    },
];

impl Bound {
    /// The same bound with `min` refused.
    pub const fn open_min(self) -> Bound {
        Bound {
            min_open: true,
            ..self
        }
    }
}

/// A text field's value: empty text is no value (as an empty field reads).
fn text_or_empty(s: &str) -> Cell {
    if s.is_empty() {
        Cell::Empty
    } else {
        Cell::Text(s.to_string())
    }
}

/// The row of [`COLUMNS`] named `key` (exact, lower case).
pub fn column(key: &str) -> Option<&'static Column> {
    COLUMNS.iter().find(|c| c.key == key)
}

/// The position in [`COLUMNS`] of the field named `key` (exact, lower case).
pub fn column_index(key: &str) -> Option<usize> {
    COLUMNS.iter().position(|c| c.key == key)
}

/// One target of a programme.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Target {
    /// Name, unique in the file.
    pub name: String,
    /// ICRS right ascension, degrees (epoch J2000.0 unless `epoch_yr` says otherwise).
    pub ra_deg: f64,
    /// ICRS declination, degrees.
    pub dec_deg: f64,
    /// Method.
    pub kind: Kind,
    /// Expected parallax, milliarcseconds.
    pub parallax_mas: Option<f64>,
    /// Error of a parallax already measured, milliarcseconds (the ladder
    /// takes the parallax as given instead of planning epochs).
    pub parallax_err_mas: Option<f64>,
    /// Proper motion in RA, μα* = μα cos δ, mas/yr.
    pub pm_ra_masyr: f64,
    /// Proper motion in Dec, mas/yr.
    pub pm_dec_masyr: f64,
    /// Epoch of the catalogue position (Julian year, TT), default 2000.0.
    pub epoch_yr: f64,
    /// Magnitude in `band` (parallax targets, or plain).
    pub mag: Option<f64>,
    /// Photometric band.
    pub band: String,
    /// V−I colour of a parallax target, mag (differential chromatic refraction).
    pub color_vi_mag: Option<f64>,
    /// Number of reference stars measured with a parallax target (none: estimated).
    pub ref_star_count: Option<f64>,
    /// Typical magnitude of those reference stars in `band` (none: estimated).
    pub ref_mag: Option<f64>,
    /// Mean V−I colour of the reference stars, mag (none: the method's default).
    pub ref_color_vi_mag: Option<f64>,
    /// Pulsation period, days.
    pub period_d: Option<f64>,
    /// Epoch of maximum light, BJD_TDB.
    pub epoch_max_bjd: Option<f64>,
    /// Period uncertainty, days.
    pub period_err_d: Option<f64>,
    /// Peak-to-peak amplitude, mag.
    pub amplitude_mag: Option<f64>,
    /// Intensity-mean magnitude, mag.
    pub mean_mag: Option<f64>,
    /// A pulsator's class (`cepheid`, `rrlyrae`, `mira`); empty: inferred
    /// from the period where that is unambiguous.
    pub class: String,
    /// The field (host galaxy or cluster, a target of kind `field`) a
    /// pulsator belongs to; empty: none.
    pub field: String,
    /// A pulsator's observed times of maximum, `BJD[:err_d]` separated by
    /// spaces, commas or semicolons ([`maxima_list`]); empty: none.
    pub maxima_bjd: String,
    /// The metallicity [Fe/H] of a pulsator or a field's mean, dex.
    pub feh_dex: Option<f64>,
    /// Its uncertainty, dex.
    pub feh_err_dex: Option<f64>,
    /// Discovery instant (transients).
    pub discovered: Option<Instant>,
    /// Expected peak magnitude (transients).
    pub peak_mag: Option<f64>,
    /// Magnitude at discovery (transients).
    pub mag_now: Option<f64>,
    /// Redshift (transients).
    pub redshift: Option<f64>,
    /// Foreground extinction in `band`, mag (default 0).
    pub extinction_mag: f64,
    /// Bands of a transient's chase, B first ("B V R"; empty: the configured ones).
    pub bands: String,
    /// A transient's spectroscopic class (`Ia`); empty: an unclassified candidate.
    pub classification: String,
    /// Distance modulus of a transient's host from its own method, mag (a calibrator).
    pub host_mu_mag: Option<f64>,
    /// Its uncertainty, mag.
    pub host_mu_err_mag: Option<f64>,
    /// The field (host galaxy) whose distance calibrates this transient;
    /// empty: none (a link checked at load, [`crate::io::links`]).
    pub host: String,
    /// Error of the standardized peak of a supernova already observed, mag
    /// (the ladder takes it as given instead of planning a chase).
    pub peak_err_mag: Option<f64>,
    /// Distance-precision goal, percent.
    pub goal_pct: Option<f64>,
    /// Priority (higher first), default 1.
    pub priority: f64,
    /// Free notes.
    pub notes: String,
    /// How the fields were written in the file or typed in the form (kept only
    /// by readers that are asked to, for saving); never part of the target's
    /// value.
    #[serde(skip)]
    pub written: Written,
}

impl Target {
    /// A plain target at ICRS degrees, every other field at its default.
    pub fn plain(name: &str, ra_deg: f64, dec_deg: f64) -> Self {
        Target {
            name: name.to_string(),
            ra_deg,
            dec_deg,
            kind: DEFAULT_KIND,
            parallax_mas: None,
            parallax_err_mas: None,
            pm_ra_masyr: 0.0,
            pm_dec_masyr: 0.0,
            epoch_yr: 2000.0,
            mag: None,
            band: "V".into(),
            color_vi_mag: None,
            ref_star_count: None,
            ref_mag: None,
            ref_color_vi_mag: None,
            period_d: None,
            epoch_max_bjd: None,
            period_err_d: None,
            amplitude_mag: None,
            mean_mag: None,
            class: String::new(),
            field: String::new(),
            maxima_bjd: String::new(),
            feh_dex: None,
            feh_err_dex: None,
            discovered: None,
            peak_mag: None,
            mag_now: None,
            redshift: None,
            extinction_mag: 0.0,
            bands: String::new(),
            classification: String::new(),
            host_mu_mag: None,
            host_mu_err_mag: None,
            host: String::new(),
            peak_err_mag: None,
            goal_pct: None,
            priority: 1.0,
            notes: String::new(),
            written: Written::default(),
        }
    }

    /// The value of a field of [`COLUMNS`] (empty for a name not in it).
    pub fn get(&self, key: &str) -> Cell {
        column(key).map_or(Cell::Empty, |c| (c.get)(self))
    }

    /// The catalogue place with space motion, at epoch J2000.0 as SOFA `atciq`
    /// wants it (moved from `epoch_yr` with SOFA `pmsafe` when that differs).
    pub fn place(&self) -> CatalogPlace {
        let mas = (1e-3_f64 / 3600.0).to_radians();
        let dec = self.dec_deg.to_radians();
        let cd = dec.cos().max(1e-9);
        let p = CatalogPlace {
            ra_rad: self.ra_deg.to_radians(),
            dec_rad: dec,
            pm_ra_rad_yr: self.pm_ra_masyr * mas / cd,
            pm_dec_rad_yr: self.pm_dec_masyr * mas,
            parallax_arcsec: self.parallax_mas.unwrap_or(0.0).max(0.0) * 1e-3,
            rv_kms: 0.0,
        };
        if (self.epoch_yr - 2000.0).abs() < 1e-9 {
            return p;
        }
        let (e1a, e1b) = sofars::cal::epj2jd(self.epoch_yr);
        match sofars::astro::pmsafe(
            p.ra_rad,
            p.dec_rad,
            p.pm_ra_rad_yr,
            p.pm_dec_rad_yr,
            p.parallax_arcsec,
            p.rv_kms,
            e1a,
            e1b,
            2451545.0,
            0.0,
        ) {
            Ok((v, _)) => CatalogPlace {
                ra_rad: v[0],
                dec_rad: v[1],
                pm_ra_rad_yr: v[2],
                pm_dec_rad_yr: v[3],
                parallax_arcsec: v[4],
                rv_kms: v[5],
            },
            Err(_) => p,
        }
    }
}

/// How a target's fields were written: the text of each field (by lower-case
/// name, fields rung does not read included) and the place of its row in the
/// file it came from. A save writes a field whose value has not changed with
/// this text, so `04:05:12.0` stays sexagesimal and `61.3` never becomes
/// `61.29999999999999`. Two targets that differ only here are equal.
#[derive(Clone, Default)]
pub struct Written(pub Option<Arc<AsWritten>>);

/// See [`Written`].
#[derive(Debug, Clone, Default)]
pub struct AsWritten {
    /// (field name in lower case, text as written, trimmed), in file order.
    pub fields: Vec<(String, String)>,
    /// The row of the file this target was read from, when it was read from a
    /// CSV file with its layout kept ([`crate::io::csv_text::Layout`]).
    pub row: Option<crate::io::csv_text::RowRef>,
}

impl Written {
    /// The text of field `key` as written, if any.
    pub fn text(&self, key: &str) -> Option<&str> {
        self.0
            .as_ref()?
            .fields
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.as_str())
    }
    /// The file row the target was read from.
    pub fn row(&self) -> Option<&crate::io::csv_text::RowRef> {
        self.0.as_ref()?.row.as_ref()
    }
}

impl PartialEq for Written {
    /// Always equal: how a value was written is not part of it.
    fn eq(&self, _: &Written) -> bool {
        true
    }
}

impl std::fmt::Debug for Written {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match &self.0 {
            None => write!(f, "Written(-)"),
            Some(w) => write!(f, "Written({} fields)", w.fields.len()),
        }
    }
}

/// A refusal: (field, what is wrong).
pub type Refusal = (String, String);

/// `s` cut to 40 characters for a message.
pub fn cut(s: &str) -> String {
    let c: String = s.chars().take(40).collect();
    if s.chars().count() > 40 {
        format!("{c}…")
    } else {
        c
    }
}

/// Refuse a field over [`MAX_FIELD_BYTES`].
pub fn check_len(key: &str, v: &str) -> Result<(), Refusal> {
    if v.len() > MAX_FIELD_BYTES {
        return Err((
            key.to_string(),
            format!(
                "{} bytes is longer than the {MAX_FIELD_BYTES}-byte limit",
                v.len()
            ),
        ));
    }
    Ok(())
}

/// Read the text of field `c` (empty text gives the field's default).
pub fn read_cell(c: &Column, text: &str) -> Result<Cell, Refusal> {
    let t = text.trim();
    let t = if t.is_empty() { c.default } else { t };
    if t.is_empty() {
        return Ok(Cell::Empty);
    }
    let refuse = |why: String| (c.key.to_string(), why);
    let cell = match c.ty {
        Ty::Text => Cell::Text(t.to_string()),
        Ty::Number => match t.parse::<f64>() {
            Ok(x) if x.is_finite() => Cell::Num(x),
            _ => return Err(refuse(format!("'{}' is not a finite number", cut(t)))),
        },
        Ty::Ra => Cell::Num(parse_ra_deg(t).map_err(|e| refuse(e.to_string()))?),
        Ty::Dec => Cell::Num(parse_dec_deg(t).map_err(|e| refuse(e.to_string()))?),
        Ty::Time => Cell::Time(parse_instant(t).map_err(|e| refuse(e.to_string()))?),
        Ty::Kind => Cell::Kind(
            Kind::parse(t)
                .ok_or_else(|| refuse(format!("'{}' is not one of {}", cut(t), Kind::names())))?,
        ),
        Ty::Choice(list) => Cell::Text(
            list.iter()
                .find(|o| o.eq_ignore_ascii_case(t))
                .ok_or_else(|| refuse(format!("'{}' is not one of {}", cut(t), list.join(", "))))?
                .to_string(),
        ),
    };
    if let Cell::Num(x) = cell
        && let Some(b) = c.bounds.iter().find(|b| !b.admits(x))
    {
        return Err(refuse(b.refusal(x)));
    }
    Ok(cell)
}

/// The text of each field of [`COLUMNS`] for one row (index as in [`COLUMNS`]);
/// `None` for a field the row does not have.
pub type Slots<'a> = [Option<&'a str>; COLUMNS.len()];

/// The times of maximum written in a `maxima_bjd` field: `BJD` or
/// `BJD:err_d` items (BJD_TDB, error in days) separated by spaces, commas or
/// semicolons; either every item has an error or none has. Refused with the
/// reason: an item that is not a full BJD_TDB (2400000–2500000), an error
/// that is not positive and below 10 days, errors on some items only.
pub fn maxima_list(text: &str) -> Result<Vec<(f64, Option<f64>)>, String> {
    let mut out = Vec::new();
    for item in text
        .split(|c: char| c.is_whitespace() || c == ',' || c == ';')
        .filter(|x| !x.is_empty())
    {
        let (b, e) = match item.split_once(':') {
            Some((b, e)) => (b, Some(e)),
            None => (item, None),
        };
        let bjd: f64 = b
            .parse()
            .ok()
            .filter(|x: &f64| x.is_finite() && (2_400_000.0..=2_500_000.0).contains(x))
            .ok_or_else(|| {
                format!("'{item}' is not a full BJD_TDB such as 2461003.185 (optionally :error_d)")
            })?;
        let err = match e {
            None => None,
            Some(e) => Some(
                e.parse()
                    .ok()
                    .filter(|x: &f64| x.is_finite() && *x > 0.0 && *x < 10.0)
                    .ok_or_else(|| {
                        format!("'{item}': the error after ':' must be days, above 0 and below 10")
                    })?,
            ),
        };
        out.push((bjd, err));
    }
    if out.iter().any(|m| m.1.is_some()) && out.iter().any(|m| m.1.is_none()) {
        return Err("give an error (BJD:err_d) for every time of maximum, or for none".into());
    }
    Ok(out)
}

/// Build a target from the text of its fields, checking each against the
/// fields table and the kind's row of the kinds table; the refusal names the
/// field.
pub fn target_from_slots(slots: &Slots) -> Result<Target, Refusal> {
    let mut t = Target::plain("", 0.0, 0.0);
    for (i, c) in COLUMNS.iter().enumerate() {
        let cell = read_cell(c, slots[i].unwrap_or(""))?;
        if let Required(why) = c.need
            && cell.is_empty()
        {
            return Err((c.key.to_string(), why.to_string()));
        }
        (c.set)(&mut t, cell);
    }
    // A period uncertainty as large as the period leaves no phase (rung::bounds).
    if let Some(e) = t.period_err_d
        && let Some(why) = crate::bounds::period_err_why_not(e, t.period_d)
    {
        return Err(("period_err_d".to_string(), why));
    }
    if let Err(why) = maxima_list(&t.maxima_bjd) {
        return Err(("maxima_bjd".to_string(), why));
    }
    for (key, need) in t.kind.spec().fields {
        let missing = |k: &str| t.get(k).is_empty();
        match need {
            Required(why) if missing(key) => return Err((key.to_string(), why.to_string())),
            OneOf(keys, why) if keys.iter().all(|k| missing(k)) => {
                return Err((keys[0].to_string(), why.to_string()));
            }
            _ => {}
        }
    }
    Ok(t)
}

/// Build a target from (field, text) pairs (field names in lower case; a
/// repeated field's first text is read); the refusal names the field. Fields
/// not in [`COLUMNS`] are not read (the readers say so); `keep` keeps every
/// pair as [`Written`] on the target.
pub fn target_from_fields(fields: &[(String, String)]) -> Result<Target, Refusal> {
    target_from_pairs(fields, false)
}

/// [`target_from_fields`], keeping the text of every field on the target when `keep`.
pub fn target_from_pairs(fields: &[(String, String)], keep: bool) -> Result<Target, Refusal> {
    for (k, v) in fields {
        check_len(k, v)?;
    }
    let mut slots: Slots = [None; COLUMNS.len()];
    for (k, v) in fields {
        if let Some(i) = column_index(k) {
            slots[i].get_or_insert(v.as_str());
        }
    }
    let mut t = target_from_slots(&slots)?;
    if keep {
        t.written = Written(Some(Arc::new(AsWritten {
            fields: fields
                .iter()
                .map(|(k, v)| (k.clone(), v.trim().to_string()))
                .collect(),
            row: None,
        })));
    }
    Ok(t)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bound_text(b: &Bound) -> String {
        let n = |x: f64| {
            if x.is_infinite() {
                if x > 0.0 {
                    "∞".to_string()
                } else {
                    "-∞".to_string()
                }
            } else {
                format!("{x}")
            }
        };
        let lo = if b.min_open || b.min.is_infinite() {
            "("
        } else {
            "["
        };
        let hi = if b.max_open || b.max.is_infinite() {
            ")"
        } else {
            "]"
        };
        format!("{lo}{}, {}{hi}", n(b.min), n(b.max))
    }

    /// The fields table as DEVELOPERS.md shows it.
    fn fields_markdown() -> String {
        let mut out = String::from(
            "| field | unit / form | kinds | required | default | bounds |\n| --- | --- | --- | --- | --- | --- |\n",
        );
        for c in COLUMNS {
            let users: Vec<&str> = KINDS
                .iter()
                .filter(|k| k.fields.iter().any(|(f, _)| *f == c.key))
                .map(|k| k.name)
                .collect();
            let kinds = if c.every_kind {
                "all".to_string()
            } else {
                users.join(", ")
            };
            let mut required: Vec<String> = Vec::new();
            if let Required(_) = c.need {
                required.push("all".into());
            }
            for k in KINDS {
                for (f, need) in k.fields {
                    match need {
                        Required(_) if *f == c.key => required.push(k.name.to_string()),
                        OneOf(keys, _) if keys.contains(&c.key) => required.push(format!(
                            "{} ({})",
                            k.name,
                            keys.iter()
                                .map(|x| format!("`{x}`"))
                                .collect::<Vec<_>>()
                                .join(" or ")
                        )),
                        _ => {}
                    }
                }
            }
            let default = match c.default {
                "" => String::new(),
                d => format!("`{d}`"),
            };
            let bounds: Vec<String> = c.bounds.iter().map(bound_text).collect();
            out.push_str(&format!(
                "| `{}` | {} | {} | {} | {} | {} |\n",
                c.key,
                c.unit,
                kinds,
                required.join(", "),
                default,
                bounds.join(" and ")
            ));
        }
        out
    }

    #[test]
    fn developers_md_shows_the_fields_table_as_it_is() {
        let doc = std::fs::read_to_string(
            std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("DEVELOPERS.md"),
        )
        .unwrap();
        let table = fields_markdown();
        assert!(
            doc.contains(&table),
            "DEVELOPERS.md's table of targets-file fields is out of date; it should read:\n{table}"
        );
    }

    #[test]
    fn every_kind_has_one_row_and_serde_uses_its_name() {
        for k in KINDS {
            assert_eq!(k.kind.spec().name, k.name);
            assert_eq!(
                serde_json::to_string(&k.kind).unwrap(),
                format!("\"{}\"", k.name)
            );
            assert_eq!(Kind::parse(&k.name.to_uppercase()), Some(k.kind));
            for (f, _) in k.fields {
                assert!(column(f).is_some(), "{}: field {f} not in COLUMNS", k.name);
            }
        }
        let glyphs: std::collections::HashSet<char> = KINDS.iter().map(|k| k.glyph).collect();
        assert_eq!(glyphs.len(), KINDS.len(), "glyphs tell kinds apart");
        assert_eq!(Kind::parse(""), Some(DEFAULT_KIND));
        assert_eq!(Kind::parse("quasar"), None);
    }

    #[test]
    fn defaults_of_the_table_are_those_of_a_plain_target() {
        let t = Target::plain("x", 1.0, 2.0);
        for c in COLUMNS {
            let d = read_cell(c, "").unwrap();
            if !c.default.is_empty() {
                assert_eq!((c.get)(&t), d, "{}", c.key);
            }
            let mut u = t.clone();
            (c.set)(&mut u, (c.get)(&t));
            assert_eq!(u, t, "{}: set(get) changes the target", c.key);
        }
        let keys: std::collections::HashSet<&str> = COLUMNS.iter().map(|c| c.key).collect();
        assert_eq!(keys.len(), COLUMNS.len(), "a field named twice");
    }

    #[test]
    fn bounds_refuse_what_they_say() {
        let c = column("goal_pct").unwrap();
        assert!(read_cell(c, "0").is_err());
        assert!(read_cell(c, "100").is_ok());
        assert!(read_cell(c, "100.01").is_err());
        let c = column("epoch_max_bjd").unwrap();
        assert!(read_cell(c, "2436934.5").is_ok());
        assert!(read_cell(c, "2488069.5").is_err());
        assert_eq!(
            read_cell(column("band").unwrap(), "r").unwrap(),
            Cell::Text("R".into())
        );
    }
}
