//! Programme settings, resolved once and handed to every command, view,
//! budget and plan: the site, the instrument, the bands, the date range, the
//! altitude and Sun limits, the default distance goal and every distance
//! method with its configuration.
//!
//! # Layers
//!
//! Each setting is taken from the first layer that gives it:
//!
//! 1. the command line (or a choice made in the terminal UI);
//! 2. the programme's own settings file, `<targets stem>.settings.toml`
//!    beside the targets file (`targets.csv` → `targets.settings.toml`), its
//!    `[programme]` table;
//! 3. the user's `settings.toml` in the user config folder, its `[programme]` table;
//! 4. the built-in defaults below.
//!
//! The method configurations layer the same way (built-in `config/NAME.toml`,
//! the user's `NAME.toml`, then a file given with `--config`), key by key
//! (`crate::config`).
//!
//! # The built-in defaults (one per setting, everywhere)
//!
//! | setting | default |
//! | --- | --- |
//! | `site` | [`DEFAULT_SITE`], the demo observatory |
//! | `instrument` | [`DEFAULT_INSTRUMENT`], the demo telescope |
//! | `min_alt_deg` | [`DEFAULT_MIN_ALT_DEG`] = 30° (airmass 2) |
//! | `sun_alt_deg` | [`DEFAULT_SUN_ALT_DEG`] = −12°, nautical twilight, for every method; the parallax method also keeps to its own airmass limit (`config/parallax.toml`) |
//! | `from` | the coming night ([`tonight`]) |
//! | `to` | [`DEFAULT_RANGE_MONTHS`] = 36 months after `from`, less a day (the baseline a parallax needs) |
//! | `goal_pct` | none: a target's own `goal_pct`, else the method's default (the transient method's `default_goal_pct`), else no goal |
//!
//! A range that does not come from the command line never starts on a night
//! that is over: its first night is moved to the coming night. A range given
//! on the command line is taken as given.
//!
//! # Which night is tonight
//!
//! [`tonight`]: after local noon, the coming night (the one that begins this
//! evening); in the dark hours after midnight, the night in progress (which
//! began yesterday evening); in the morning after sunrise, the coming night.

use crate::astro::frames::Context;
use crate::astro::night::{Limits, NAUTICAL_DEG, SUN_RISE_SET_DEG};
use crate::astro::site::Site;
use crate::astro::time::{Instant, parse_date};
use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use crate::io::targets::{Kind, Target};
use crate::ladder::parallax::{ParallaxMethod, ParallaxPlan};
use crate::ladder::pulsator::{PhaseReport, PulsatorMethod};
use crate::ladder::transient::{Chase, TransientMethod};
use crate::ladder::{Method, MethodSet, Prediction, Setting};
use crate::photometry::{BandSet, Instrument, Photometer};
use chrono::{NaiveDate, Timelike};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The site used when no layer names one: the invented demo observatory.
pub const DEFAULT_SITE: &str = "pampa-lucero";
/// The instrument used when no layer names one: the invented demo telescope.
pub const DEFAULT_INSTRUMENT: &str = crate::photometry::DEMO_INSTRUMENT;
/// Lowest observed altitude of a window, degrees (airmass 2; common practice).
pub const DEFAULT_MIN_ALT_DEG: f64 = 30.0;
/// The Sun's centre must be below this altitude, degrees: nautical twilight,
/// for every method and view (a parallax programme observes in the bright
/// edge of the night too; the sky model charges the twilight sky).
pub const DEFAULT_SUN_ALT_DEG: f64 = NAUTICAL_DEG;
/// Length of the default range, months from its first night.
pub const DEFAULT_RANGE_MONTHS: u32 = 36;

/// Where a setting's value came from.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Origin {
    /// The command line, or a choice made in the terminal UI.
    CommandLine,
    /// The programme's own settings file.
    Programme,
    /// The user's `settings.toml`.
    User,
    /// The built-in default.
    BuiltIn,
    /// The clock: the coming night ([`tonight`]).
    Clock,
}

/// A date in a settings file: a TOML date (`from = 2026-12-01`) or a string.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(untagged)]
enum DateValue {
    Text(String),
    Date(toml::value::Datetime),
}

impl DateValue {
    fn text(&self) -> String {
        match self {
            DateValue::Text(s) => s.clone(),
            DateValue::Date(d) => d.to_string(),
        }
    }
}

fn de_date<'de, D: serde::Deserializer<'de>>(
    d: D,
) -> std::result::Result<Option<String>, D::Error> {
    Ok(Option::<DateValue>::deserialize(d)?.map(|v| v.text()))
}

/// The settings one layer may choose, every one optional. The same keys on
/// the command line (`--site`, `--instrument`, `--from`, `--to`, `--min-alt`,
/// `--sun-alt`, `--goal-pct`) and in a `[programme]` table.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Choices {
    /// Site: a catalogue name or `LAT,LON,ELEV_M[,ZONE]`.
    pub site: Option<String>,
    /// Instrument catalogue name.
    pub instrument: Option<String>,
    /// First night of the range (local date of its evening).
    #[serde(default, deserialize_with = "de_date")]
    pub from: Option<String>,
    /// Last night of the range, inclusive.
    #[serde(default, deserialize_with = "de_date")]
    pub to: Option<String>,
    /// Lowest observed altitude of a window, degrees.
    pub min_alt_deg: Option<f64>,
    /// The Sun must be below this altitude, degrees.
    pub sun_alt_deg: Option<f64>,
    /// Distance-precision goal (percent) for targets without their own.
    pub goal_pct: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SettingsFile {
    programme: Option<Choices>,
}

/// The settings file of a programme: `<stem>.settings.toml` beside its
/// targets file (`targets.csv` → `targets.settings.toml`).
pub fn settings_path(targets: &Path) -> PathBuf {
    let stem = targets
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "programme".into());
    targets.with_file_name(format!("{stem}.settings.toml"))
}

/// Read the `[programme]` table of a settings file; errors name the file,
/// the line and the key.
pub fn read_choices(layer: &Layer) -> Result<Choices> {
    let f: SettingsFile = config::parse(layer)?;
    Ok(f.programme.unwrap_or_default())
}

/// What a command (or the UI) asks for.
#[derive(Debug, Clone, Default)]
pub struct Request {
    /// Choices made on the command line.
    pub cli: Choices,
    /// The programme's targets file, whose settings file (if any) is read.
    pub programme: Option<PathBuf>,
    /// Method configuration files named on the command line, by config file
    /// name (`parallax.toml` → the file given to `rung parallax --config`).
    pub method_files: BTreeMap<String, PathBuf>,
}

/// One layer of choices with where it came from.
struct Chosen {
    choices: Choices,
    origin: Origin,
    layer: Option<Layer>,
}

impl Chosen {
    /// An error in a value this layer gave, named where it was given: the
    /// file, line and key of a settings file, or the command-line option.
    fn blame(&self, key: &str, option: &str, e: RungError) -> RungError {
        // The value's own name: the key, the option, or (for a goal) "goal".
        let own =
            |what: &str| what == key || what == option || (key == "goal_pct" && what == "goal");
        match (&self.layer, e) {
            (Some(l), RungError::Invalid { what, why }) => {
                let why = if own(&what) {
                    why
                } else {
                    format!("{what}: {why}")
                };
                l.error_at(&format!("programme.{key}"), why).with_field(key)
            }
            (Some(l), other) => l
                .error_at(&format!("programme.{key}"), other.to_string())
                .with_field(key),
            (None, RungError::Invalid { what, why }) => {
                let what = if own(&what) {
                    option.to_string()
                } else {
                    format!("{what} in {option}")
                };
                RungError::Invalid { what, why }
            }
            (None, other) => RungError::invalid(option, other.to_string()),
        }
    }
}

/// The resolved settings of a programme: what every command, view, budget
/// and plan receives.
#[derive(Debug, Clone)]
pub struct Settings {
    /// The site.
    pub site: Site,
    /// How the site was named (catalogue name or inline spec), as a plan file keeps it.
    pub site_spec: String,
    /// The exposure model: the instrument and the band table (built-in
    /// merged with the user's) at the site.
    pub photometer: Photometer,
    /// First night of the range (local date of its evening).
    pub from: NaiveDate,
    /// Last night of the range, inclusive.
    pub to: NaiveDate,
    /// The first night asked for, before a night that is over was skipped.
    pub from_asked: NaiveDate,
    /// Altitude and Sun limits of observing windows.
    pub limits: Limits,
    /// Distance goal (percent) for targets without their own.
    pub goal_pct: Option<f64>,
    /// Every distance method with its configuration (`ladder::methods`).
    pub methods: MethodSet,
    /// The fields' configuration (`config/field.toml`, the user's
    /// `field.toml`, then a `field.toml` named on the command line).
    pub fields: crate::ladder::field::FieldConfig,
    /// Where each setting came from (`site`, `instrument`, `from`, `to`,
    /// `min_alt_deg`, `sun_alt_deg`, `goal_pct`).
    pub origins: BTreeMap<&'static str, Origin>,
    /// The settings file that gave the range's last night (else its
    /// first), with that key (`to` or `from`), so that a range a plan or a
    /// budget cannot span is named there ([`Settings::nights`]); `None`
    /// when the range came from the command line or the defaults.
    pub range_file: Option<(Layer, &'static str)>,
}

impl PartialEq for Settings {
    fn eq(&self, o: &Self) -> bool {
        self.site == o.site
            && self.site_spec == o.site_spec
            && self.photometer.instrument == o.photometer.instrument
            && self.photometer.bands == o.photometer.bands
            && self.photometer.seeing_fwhm_arcsec == o.photometer.seeing_fwhm_arcsec
            && self.from == o.from
            && self.to == o.to
            && self.limits == o.limits
            && self.goal_pct == o.goal_pct
            && self.methods == o.methods
            && self.fields == o.fields
    }
}

/// The coming night at `site` for the clock `now` (the local date whose
/// evening starts it): after local noon the night that begins this evening;
/// before noon, the night in progress while the Sun is still below the
/// horizon (its centre below −0°50′, the sunrise altitude), else (after
/// sunrise) the coming night.
pub fn tonight(site: &Site, now: Instant) -> Result<NaiveDate> {
    let local = now.local(&site.timezone);
    let today = local.date_naive();
    if local.hour() >= 12 {
        return Ok(today);
    }
    let sun_deg = Context::exact(site, now)?.sun().alt_geom_rad.to_degrees();
    if sun_deg < SUN_RISE_SET_DEG {
        Ok(today.pred_opt().unwrap_or(today))
    } else {
        Ok(today)
    }
}

impl Settings {
    /// Resolve every setting once (see the module documentation for the
    /// layers and defaults) for the clock `now`.
    pub fn resolve(req: &Request, now: Instant) -> Result<Settings> {
        let mut layers = vec![Chosen {
            choices: req.cli.clone(),
            origin: Origin::CommandLine,
            layer: None,
        }];
        if let Some(t) = &req.programme {
            let p = settings_path(t);
            if p.exists() {
                let l = Layer::read(&p)?;
                layers.push(Chosen {
                    choices: read_choices(&l)?,
                    origin: Origin::Programme,
                    layer: Some(l),
                });
            }
        }
        if let Some(l) = config::SETTINGS.user_layer()? {
            layers.push(Chosen {
                choices: read_choices(&l)?,
                origin: Origin::User,
                layer: Some(l),
            });
        }
        let mut origins = BTreeMap::new();
        // The first layer that gives a value, with the layer.
        macro_rules! pick {
            ($field:ident) => {{
                let hit = layers
                    .iter()
                    .find_map(|c| c.choices.$field.clone().map(|v| (v, c)));
                origins.insert(
                    stringify!($field),
                    hit.as_ref()
                        .map_or(Origin::BuiltIn, |(_, c)| c.origin.clone()),
                );
                hit
            }};
        }
        let (site_spec, site) = match pick!(site) {
            Some((spec, c)) => (
                spec.clone(),
                crate::io::sites::resolve(&spec).map_err(|e| c.blame("site", "--site", e))?,
            ),
            None => (
                DEFAULT_SITE.to_string(),
                crate::io::sites::resolve(DEFAULT_SITE)?,
            ),
        };
        let instrument = match pick!(instrument) {
            Some((name, c)) => crate::photometry::instrument::resolve(&name)
                .map_err(|e| c.blame("instrument", "--instrument", e))?,
            None => crate::photometry::instrument::resolve(DEFAULT_INSTRUMENT)?,
        };
        let min_alt = pick!(min_alt_deg);
        let sun_alt = pick!(sun_alt_deg);
        let limits = Limits::new(
            min_alt.as_ref().map_or(DEFAULT_MIN_ALT_DEG, |x| x.0),
            sun_alt.as_ref().map_or(DEFAULT_SUN_ALT_DEG, |x| x.0),
        )
        .map_err(|e| {
            let which = match &e {
                RungError::Invalid { what, .. } if what == "--min-alt" => {
                    min_alt.as_ref().map(|x| (x.1, "min_alt_deg", "--min-alt"))
                }
                _ => sun_alt.as_ref().map(|x| (x.1, "sun_alt_deg", "--sun-alt")),
            };
            match which {
                Some((c, key, opt)) => c.blame(key, opt, e),
                None => e,
            }
        })?;
        let goal_pct = match pick!(goal_pct) {
            Some((g, c)) => Some(check_goal(g).map_err(|e| c.blame("goal_pct", "--goal-pct", e))?),
            None => None,
        };
        let tonight = tonight(&site, now)?;
        let date = |text: &str, c: &Chosen, key: &str, opt: &str| {
            parse_date(text).map_err(|e| c.blame(key, opt, e))
        };
        let from_pick = pick!(from);
        let (from_asked, from_cli) = match &from_pick {
            Some((text, c)) => (
                date(text, c, "from", "--from")?,
                c.origin == Origin::CommandLine,
            ),
            None => {
                origins.insert("from", Origin::Clock);
                (tonight, false)
            }
        };
        let from = if from_cli {
            from_asked
        } else {
            from_asked.max(tonight)
        };
        let to_pick = pick!(to);
        let range_file = [(&to_pick, "to"), (&from_pick, "from")]
            .into_iter()
            .find_map(|(pick, key)| Some((pick.as_ref()?.1.layer.clone()?, key)));
        let to = match &to_pick {
            Some((text, c)) => date(text, c, "to", "--to")?,
            None => from
                .checked_add_months(chrono::Months::new(DEFAULT_RANGE_MONTHS))
                .and_then(|d| d.pred_opt())
                .ok_or_else(|| RungError::invalid("--from", "too late for a default range"))?,
        };
        if to < from {
            let Some((_, c)) = &to_pick else {
                return Err(RungError::invalid("date range", "it is empty"));
            };
            let e = if from > from_asked {
                RungError::invalid(
                    "to",
                    format!(
                        "the range ended on {to}, before the coming night {from}: give a later last night"
                    ),
                )
            } else if c.origin == Origin::CommandLine && from_cli {
                RungError::invalid("date range", format!("--from {from} is after --to {to}"))
            } else {
                RungError::invalid("to", format!("{to} is before the first night {from}"))
            };
            return Err(match e {
                RungError::Invalid { ref what, .. } if what == "date range" => e,
                e => c.blame("to", "--to", e),
            });
        }
        Ok(Settings {
            photometer: Photometer::new(instrument, BandSet::load()?, site.clone()),
            site,
            site_spec,
            from,
            to,
            from_asked,
            limits,
            goal_pct,
            methods: crate::ladder::methods(&req.method_files)?,
            fields: crate::ladder::field::FieldConfig::load(
                req.method_files.get("field.toml").map(|p| p.as_path()),
            )?,
            origins,
            range_file,
        })
    }

    /// The instrument.
    pub fn instrument(&self) -> &Instrument {
        &self.photometer.instrument
    }

    /// Where and when a method may observe `target`: the programme's site,
    /// range and limits.
    pub fn setting<'a>(&'a self, target: &'a Target) -> Setting<'a> {
        Setting {
            site: &self.site,
            target,
            from: self.from,
            to: self.to,
            limits: self.limits,
        }
    }

    /// The method for a kind of target, if rung has one.
    pub fn method(&self, kind: Kind) -> Option<&dyn Method> {
        self.methods.for_kind(kind)
    }

    /// The distance goal of a target: its own `goal_pct`, else the
    /// programme's, else its method's default, else none.
    pub fn goal_for(&self, t: &Target) -> Option<f64> {
        match self.method(t.kind) {
            Some(m) => crate::ladder::goal_for(t, self.goal_pct, m),
            None => t.goal_pct.or(self.goal_pct),
        }
    }

    /// The planner of fields: the pulsating-star method (its relations, bins,
    /// harmonics and SNR limits) and the fields' configuration. An error when
    /// the settings have no pulsating-star method.
    pub fn field_planner(&self) -> Result<crate::ladder::field::FieldPlanner<'_>> {
        Ok(crate::ladder::field::FieldPlanner {
            pulsator: self
                .methods
                .get::<PulsatorMethod>()
                .ok_or_else(|| RungError::invalid("field", "no pulsating-star method"))?,
            config: &self.fields,
        })
    }

    /// Where and when the field `g` of `targets` may be observed, with its
    /// goal (its own `goal_pct`, else the programme's).
    pub fn field_setting<'a>(
        &'a self,
        targets: &'a [Target],
        g: &crate::ladder::field::FieldGroup,
    ) -> crate::ladder::field::FieldSetting<'a> {
        crate::ladder::field::FieldSetting::of(
            &self.site,
            targets,
            g,
            self.from,
            self.to,
            self.limits,
            self.goal_pct,
        )
    }

    /// The plan of the field `g` of `targets` (its goal's, else the proposal).
    pub fn field_report(
        &self,
        targets: &[Target],
        g: &crate::ladder::field::FieldGroup,
    ) -> Result<crate::ladder::field::FieldReport> {
        self.field_planner()?
            .plan(&self.field_setting(targets, g), &self.photometer)
    }

    /// The same settings at another site (a choice made in the UI).
    pub fn with_site(&self, site: Site) -> Settings {
        let mut s = self.clone();
        s.site_spec = site.name.clone();
        s.photometer.site = site.clone();
        s.site = site;
        s.origins.insert("site", Origin::CommandLine);
        s
    }

    /// The same settings with `m` in place of the method of its kind (a
    /// command's own options for one method, e.g. `rung parallax --snr`).
    pub fn with_method(&self, m: std::sync::Arc<dyn Method>) -> Settings {
        let mut s = self.clone();
        let mut list: Vec<std::sync::Arc<dyn Method>> = Vec::new();
        let mut placed = false;
        for (k, old) in self.methods.kinds().into_iter().zip(self.methods.arcs()) {
            if k == m.kind() && !placed {
                list.push(m.clone());
                placed = true;
            } else {
                list.push(old);
            }
        }
        if !placed {
            list.push(m);
        }
        s.methods = MethodSet::new(list);
        s
    }

    /// The same settings with other limits (a choice made in the UI).
    pub fn with_limits(&self, limits: Limits) -> Settings {
        let mut s = self.clone();
        s.limits = limits;
        s.origins.insert("min_alt_deg", Origin::CommandLine);
        s.origins.insert("sun_alt_deg", Origin::CommandLine);
        s
    }

    /// The same settings over another range (a choice made in the UI, the
    /// Budget view's request): first and last night as given, checked as
    /// every plan and budget checks a range.
    pub fn with_range(&self, from: NaiveDate, to: NaiveDate) -> Result<Settings> {
        dates(from, to)?;
        let mut s = self.clone();
        s.from = from;
        s.from_asked = from;
        s.to = to;
        s.origins.insert("from", Origin::CommandLine);
        s.origins.insert("to", Origin::CommandLine);
        s.range_file = None;
        Ok(s)
    }

    /// How many nights the range holds, checked as every plan and budget
    /// checks a range ([`range_nights`]); a range a settings file gave is
    /// refused there, with its file, line and key.
    pub fn nights(&self) -> Result<usize> {
        range_nights(self.from, self.to).map_err(|e| match (&self.range_file, e) {
            (Some((l, key)), RungError::Invalid { why, .. }) => l
                .error_at(
                    &format!("programme.{key}"),
                    format!("{} to {}: {why}", self.from, self.to),
                )
                .with_field(key),
            (_, e) => e,
        })
    }

    /// The same settings with another instrument (a choice made in the UI).
    pub fn with_instrument(&self, name: &str) -> Result<Settings> {
        let mut s = self.clone();
        s.photometer = Photometer::new(
            crate::photometry::instrument::resolve(name)?,
            s.photometer.bands.clone(),
            s.site.clone(),
        );
        s.origins.insert("instrument", Origin::CommandLine);
        Ok(s)
    }

    /// The same settings when the clock has moved on to `tonight`: a range
    /// that did not come from the command line never starts on a night that is
    /// over. `None` when nothing changes.
    pub fn on_night(&self, tonight: NaiveDate) -> Option<Settings> {
        if self.origins.get("from") == Some(&Origin::CommandLine) {
            return None;
        }
        let from = self.from_asked.max(tonight).min(self.to);
        (from != self.from).then(|| {
            let mut s = self.clone();
            s.from = from;
            s
        })
    }

    /// The settings as JSON: each value and where it came from.
    pub fn to_json(&self) -> serde_json::Value {
        serde_json::json!({
            "site": self.site.name,
            "instrument": self.photometer.instrument.name,
            "from": self.from.to_string(),
            "to": self.to.to_string(),
            "min_alt_deg": self.limits.min_alt_deg,
            "sun_alt_deg": self.limits.sun_alt_deg,
            "goal_pct": self.goal_pct,
            "origins": self.origins,
        })
    }
}

/// Check a distance-precision goal in percent: within (0, 100].
pub fn check_goal(goal_pct: f64) -> Result<f64> {
    if !goal_pct.is_finite() || goal_pct <= 0.0 || goal_pct > 100.0 {
        return Err(RungError::invalid(
            "goal",
            format!("{goal_pct} % is not a distance precision in (0, 100] %"),
        ));
    }
    Ok(goal_pct)
}

/// A target's full report from its method, with the programme's settings:
/// what `rung parallax`, `rung phase`, `rung chase` and the UI's method views
/// show. Its prediction is the budget's: the same setting, photometry and goal.
#[derive(Debug, Clone, PartialEq)]
pub enum Report {
    /// The parallax plan (goal mode when the target has a goal).
    Parallax(Box<ParallaxPlan>),
    /// The pulsator's phase report (goal mode when the target has a goal and a mean magnitude).
    Phase(Box<PhaseReport>),
    /// The transient's chase.
    Chase(Box<Chase>),
    /// Another method's prediction (goal mode when the target has a goal).
    Other(Box<Prediction>),
}

impl Report {
    /// The prediction the report ends with (the budget's row comes from the same).
    pub fn prediction(&self) -> Option<Prediction> {
        match self {
            Report::Parallax(p) => Some(p.prediction.clone()),
            Report::Phase(p) => p.prediction.clone(),
            Report::Chase(c) => Some(c.prediction()),
            Report::Other(p) => Some((**p).clone()),
        }
    }
}

/// The parallax fit of a target's prediction epochs (σϖ, σμ, the ϖ–μ
/// correlation, the baseline; [`ParallaxMethod::fit_of`]) with the
/// programme's settings; `None` unless the target is a parallax target with
/// a parallax method and epochs the fit can use.
pub fn parallax_fit(
    settings: &Settings,
    target: &Target,
    epochs: &[crate::ladder::Epoch],
) -> Option<crate::ladder::parallax::Solution> {
    if target.kind != crate::io::targets::Kind::Parallax || epochs.is_empty() {
        return None;
    }
    let m = settings.method(target.kind)?;
    let p = m.as_any().downcast_ref::<ParallaxMethod>()?;
    p.fit_of(&settings.setting(target), &settings.photometer, epochs)
        .ok()
}

/// The report of `target` by its method (see [`Report`]).
pub fn report(settings: &Settings, target: &Target) -> Result<Report> {
    let m = settings.method(target.kind).ok_or_else(|| {
        RungError::invalid(
            format!("target '{}'", target.name),
            format!("no distance method for kind '{}'", target.kind.as_str()),
        )
    })?;
    let goal = settings.goal_for(target);
    let target = &*crate::ladder::with_goal(target, goal);
    let s = settings.setting(target);
    let em = &settings.photometer;
    let any = m.as_any();
    if let Some(p) = any.downcast_ref::<ParallaxMethod>() {
        let plan = match goal {
            Some(g) => p.goal_plan(&s, em, g)?,
            None => p.plan(&s, em)?,
        };
        return Ok(Report::Parallax(Box::new(plan)));
    }
    if let Some(p) = any.downcast_ref::<PulsatorMethod>() {
        let r = match goal {
            Some(g) if target.mean_mag.is_some() => p.goal_report(&s, em, g)?,
            _ => p.analyse(&s, Some(em))?,
        };
        return Ok(Report::Phase(Box::new(r)));
    }
    if let Some(t) = any.downcast_ref::<TransientMethod>() {
        return Ok(Report::Chase(Box::new(t.chase(&s, em, goal)?)));
    }
    let p = match goal {
        Some(g) => m.goal(&s, em, g)?,
        None => {
            let e = m.propose(&s, em)?;
            m.predict(&s, em, &e)?
        }
    };
    Ok(Report::Other(Box::new(p)))
}

/// Longest range one schedule may span, nights.
pub const MAX_NIGHTS: usize = 3 * 366;

/// Builds the nights from `from` to `to` ahead of the targets' work
/// ([`crate::astro::night::Night::warm_range`]) when at least two targets
/// will each ask for all of them: parallax stars and pulsators (alone or in
/// a field) follow the whole range; a supernova asks only for the nights of
/// its chase, and a single target builds its nights in parallel itself.
pub fn warm_nights(site: &Site, from: NaiveDate, to: NaiveDate, targets: &[Target]) {
    // Every kind answers (a new method's kind too: the compiler asks).
    let follows_range = |k: Kind| match k {
        Kind::Parallax | Kind::Pulsator | Kind::Field => true,
        Kind::Transient | Kind::Plain => false,
    };
    let whole_range = targets
        .iter()
        .filter(|t| follows_range(t.kind))
        .take(2)
        .count();
    if whole_range >= 2 {
        crate::astro::night::Night::warm_range(site, from, to);
    }
}

/// The dates from `from` to `to` inclusive, checked ([`range_nights`]).
pub fn dates(from: NaiveDate, to: NaiveDate) -> Result<Vec<NaiveDate>> {
    let n = range_nights(from, to)?;
    Ok(from.iter_days().take(n).collect())
}

/// How many nights `from` to `to` holds, inclusive: refused when `to` is
/// before `from` or when a plan or a budget may not span that many.
pub fn range_nights(from: NaiveDate, to: NaiveDate) -> Result<usize> {
    if from > to {
        return Err(RungError::invalid(
            "date range",
            format!("--from {from} is after --to {to}"),
        ));
    }
    let n = (to - from).num_days() as usize + 1;
    if n > MAX_NIGHTS {
        return Err(RungError::invalid(
            "date range",
            format!(
                "{n} nights is longer than the {MAX_NIGHTS} nights a plan or a budget may span"
            ),
        ));
    }
    Ok(n)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::astro::time::parse_instant;

    fn now() -> Instant {
        // 22:00 at the demo site, in the night of 2026-12-01.
        parse_instant("2026-12-02T01:00:00Z").unwrap()
    }

    fn resolve_in(dir: &Path, req: &Request) -> Result<Settings> {
        // SAFETY: the unit tests of this module that set it run one at a time (a lock).
        let _g = ENV.lock().unwrap_or_else(|e| e.into_inner());
        unsafe { std::env::set_var("RUNG_CONFIG_DIR", dir) };
        let r = Settings::resolve(req, now());
        unsafe { std::env::remove_var("RUNG_CONFIG_DIR") };
        r
    }

    static ENV: std::sync::Mutex<()> = std::sync::Mutex::new(());

    #[test]
    fn built_in_defaults_are_one_per_setting() {
        let d = tempfile::tempdir().unwrap();
        let s = resolve_in(d.path(), &Request::default()).unwrap();
        assert_eq!(s.site.name, DEFAULT_SITE);
        assert_eq!(s.instrument().name, DEFAULT_INSTRUMENT);
        assert_eq!(s.limits, Limits::new(30.0, -12.0).unwrap());
        assert_eq!(s.goal_pct, None);
        // The coming night, then 36 months less a day.
        assert_eq!(s.from.to_string(), "2026-12-01");
        assert_eq!(s.to.to_string(), "2029-11-30");
        assert_eq!(s.origins["from"], Origin::Clock);
        assert_eq!(s.origins["site"], Origin::BuiltIn);
        assert_eq!(s.methods.kinds().len(), 3);
    }

    #[test]
    fn command_line_over_programme_over_user_over_built_in() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(
            d.path().join("settings.toml"),
            "[programme]\nsite = \"sierra-alcaravan\"\nmin_alt_deg = 40\ngoal_pct = 7\n",
        )
        .unwrap();
        let prog = d.path().join("mine.csv");
        std::fs::write(
            d.path().join("mine.settings.toml"),
            "# mine\n[programme]\nmin_alt_deg = 35\nfrom = 2027-01-01\nto = \"2027-06-30\"\n",
        )
        .unwrap();
        let mut req = Request {
            programme: Some(prog),
            ..Default::default()
        };
        let s = resolve_in(d.path(), &req).unwrap();
        assert_eq!(s.site.name, "sierra-alcaravan"); // user
        assert_eq!(s.limits.min_alt_deg, 35.0); // programme over user
        assert_eq!(s.goal_pct, Some(7.0)); // user
        assert_eq!(
            (s.from.to_string(), s.to.to_string()),
            ("2027-01-01".into(), "2027-06-30".into())
        );
        assert_eq!(s.origins["site"], Origin::User);
        assert_eq!(s.origins["min_alt_deg"], Origin::Programme);
        req.cli.min_alt_deg = Some(20.0);
        req.cli.site = Some("-27.45,-68.02,3120".into());
        let s = resolve_in(d.path(), &req).unwrap();
        assert_eq!(s.limits.min_alt_deg, 20.0);
        assert_eq!(s.site.lat_deg, -27.45);
        assert_eq!(s.site_spec, "-27.45,-68.02,3120");
        assert_eq!(s.origins["min_alt_deg"], Origin::CommandLine);
    }

    #[test]
    fn a_programme_range_never_starts_on_a_night_that_is_over() {
        let d = tempfile::tempdir().unwrap();
        let prog = d.path().join("p.csv");
        std::fs::write(
            d.path().join("p.settings.toml"),
            "[programme]\nfrom = 2026-11-01\nto = 2027-01-31\n",
        )
        .unwrap();
        let mut req = Request {
            programme: Some(prog),
            ..Default::default()
        };
        let s = resolve_in(d.path(), &req).unwrap();
        assert_eq!(s.from.to_string(), "2026-12-01");
        assert_eq!(s.from_asked.to_string(), "2026-11-01");
        // Later, the clock moves the first night on.
        let later = s.on_night("2026-12-20".parse().unwrap()).unwrap();
        assert_eq!(later.from.to_string(), "2026-12-20");
        // A range given on the command line is taken as given.
        req.cli.from = Some("2026-11-01".into());
        let s = resolve_in(d.path(), &req).unwrap();
        assert_eq!(s.from.to_string(), "2026-11-01");
        assert!(s.on_night("2026-12-20".parse().unwrap()).is_none());
        // A programme whose range is over is refused, named in its file.
        std::fs::write(
            d.path().join("p.settings.toml"),
            "[programme]\nfrom = 2026-01-01\nto = 2026-03-31\n",
        )
        .unwrap();
        req.cli.from = None;
        let e = resolve_in(d.path(), &req).unwrap_err().to_string();
        assert!(
            e.contains("p.settings.toml, line 3, field 'to'")
                && e.contains("the range ended on 2026-03-31"),
            "{e}"
        );
    }

    /// A range longer than a plan or a budget may span (docs/bad-input.md
    /// D2a) is refused by those jobs where it was given: the settings file's
    /// line and key, or the command line's range.
    #[test]
    fn a_range_too_long_for_a_plan_is_named_where_it_was_given() {
        let d = tempfile::tempdir().unwrap();
        let prog = d.path().join("p.csv");
        std::fs::write(
            d.path().join("p.settings.toml"),
            "[programme]\nfrom = 2026-12-01\nto = 2035-01-01\n",
        )
        .unwrap();
        let req = Request {
            programme: Some(prog),
            ..Default::default()
        };
        // The settings resolve (a season scan may span ten years) ...
        let s = resolve_in(d.path(), &req).unwrap();
        // ... and a plan's or a budget's nights are refused in the file.
        let e = s.nights().unwrap_err().to_string();
        assert_eq!(
            e,
            format!(
                "{}, line 3, field 'to': 2026-12-01 to 2035-01-01: 2954 nights is longer than the {MAX_NIGHTS} nights a plan or a budget may span",
                d.path().join("p.settings.toml").display()
            )
        );
        // The same range from the command line names no file.
        let day = |t: &str| t.parse::<NaiveDate>().unwrap();
        assert!(s.with_range(day("2026-12-01"), day("2035-01-01")).is_err());
        let mut cli = s.clone();
        cli.range_file = None;
        assert!(
            cli.nights()
                .unwrap_err()
                .to_string()
                .starts_with("invalid date range: 2954 nights")
        );
        // A range it may span is its nights.
        let short = s.with_range(day("2026-12-01"), day("2026-12-03")).unwrap();
        assert_eq!(short.nights().unwrap(), 3);
    }

    #[test]
    fn bad_values_are_named_where_they_were_given() {
        let d = tempfile::tempdir().unwrap();
        let prog = d.path().join("p.csv");
        std::fs::write(
            d.path().join("p.settings.toml"),
            "[programme]\nsite = \"nowhere\"\n",
        )
        .unwrap();
        let mut req = Request {
            programme: Some(prog),
            ..Default::default()
        };
        let e = resolve_in(d.path(), &req).unwrap_err().to_string();
        assert!(
            e.contains("p.settings.toml, line 2, field 'site': unknown site 'nowhere'"),
            "{e}"
        );
        std::fs::write(d.path().join("p.settings.toml"), "[programme]\nsight = 1\n").unwrap();
        let e = resolve_in(d.path(), &req).unwrap_err().to_string();
        assert!(e.contains("line 2, field 'programme.sight'"), "{e}");
        std::fs::remove_file(d.path().join("p.settings.toml")).unwrap();
        req.cli.sun_alt_deg = Some(5.0);
        let e = resolve_in(d.path(), &req).unwrap_err().to_string();
        assert_eq!(e, "invalid --sun-alt: 5 is not within -90..0 degrees");
        req.cli.sun_alt_deg = None;
        req.cli.site = Some("95,0,0".into());
        let e = resolve_in(d.path(), &req).unwrap_err().to_string();
        assert_eq!(
            e,
            "invalid latitude in --site: 95 is not within -90..+90 degrees"
        );
    }

    #[test]
    fn a_users_method_file_changes_the_method_list() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("pulsator.toml"), "[defaults]\nbins = 12\n").unwrap();
        let s = resolve_in(d.path(), &Request::default()).unwrap();
        let p = s.methods.get::<PulsatorMethod>().unwrap();
        assert_eq!(p.bins, 12);
        let d2 = tempfile::tempdir().unwrap();
        let s2 = resolve_in(d2.path(), &Request::default()).unwrap();
        assert_ne!(s, s2);
        assert_eq!(s2.methods.get::<PulsatorMethod>().unwrap().bins, 10);
    }
}
