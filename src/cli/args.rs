//! Argument blocks that several subcommands share, each a `clap::Args` struct
//! used with `#[command(flatten)]` so a flag is defined (name, type, default,
//! parsing) in one place.
//!
//! The command line is a contract (`tests/cli_help/`): one option has one
//! name, unit, default and help in every command, from the blocks here; an old
//! spelling is kept as an alias. Help text is written as clap shows it: a
//! one-line doc comment loses its final full stop.

use anyhow::{Result, bail};
use rung::astro::frames::CatalogPlace;
use rung::io::angles::{parse_dec_deg, parse_ra_deg};
use rung::io::targets::Target;
use rung::programme::Choices;
use std::path::PathBuf;

/// The one target of a distance-method command (`parallax`, `phase`,
/// `chase`): by name from a targets file (the demo programme by default) or by
/// coordinates.
#[derive(clap::Args)]
pub struct MethodTarget {
    /// A target name from --targets.
    #[arg(long)]
    pub target: Option<String>,
    /// Targets file (CSV or TOML); default the demo programme.
    #[arg(long)]
    pub targets: Option<PathBuf>,
    /// Right ascension (ICRS): degrees or HH:MM:SS.s (instead of --target).
    #[arg(long, allow_hyphen_values = true)]
    pub ra: Option<String>,
    /// Declination (ICRS): degrees or ±DD:MM:SS.
    #[arg(long, allow_hyphen_values = true)]
    pub dec: Option<String>,
}

/// Where to look at, for the one-instant commands (`where`, `snr`,
/// `exptime`): coordinates, or a target by name from a targets file (the demo
/// programme by default).
#[derive(clap::Args)]
pub struct Pointing {
    /// Right ascension (ICRS): degrees or HH:MM:SS.s.
    #[arg(long, allow_hyphen_values = true)]
    pub ra: Option<String>,
    /// Declination (ICRS): degrees or ±DD:MM:SS.
    #[arg(long, allow_hyphen_values = true)]
    pub dec: Option<String>,
    /// A target name from --targets instead of --ra/--dec.
    #[arg(long)]
    pub target: Option<String>,
    /// Targets file (CSV or TOML) for --target.
    #[arg(long)]
    pub targets: Option<PathBuf>,
}

impl Pointing {
    /// The name to show, the catalogue place, and the target when one was
    /// named: `--target` wins over `--ra/--dec`; coordinates are called
    /// "coordinates".
    pub fn resolve(&self) -> Result<(String, CatalogPlace, Option<Target>)> {
        match (&self.target, &self.ra, &self.dec) {
            (Some(n), _, _) => {
                let tg = super::target_by_name(&self.targets, n)?;
                Ok((tg.name.clone(), tg.place(), Some(tg)))
            }
            (None, Some(r), Some(d)) => Ok((
                "coordinates".to_string(),
                CatalogPlace::fixed_deg(parse_ra_deg(r)?, parse_dec_deg(d)?),
                None,
            )),
            _ => bail!("give --ra and --dec, or --target NAME (with --targets FILE)"),
        }
    }
}

/// The altitude and Sun limits of an observing window. Unless given, the
/// programme's (its settings file), else the user's `settings.toml`, else the
/// built-in defaults (`rung::programme`: 30°, −12°).
#[derive(clap::Args, Default)]
pub struct WindowLimits {
    /// Minimum altitude for the window, degrees (default: the programme's, else 30)
    #[arg(long, allow_hyphen_values = true)]
    pub min_alt: Option<f64>,
    /// The Sun must be below this altitude for the window, degrees (default: the programme's, else -12)
    #[arg(long, allow_hyphen_values = true)]
    pub sun_alt: Option<f64>,
}

/// The site of a command (default: the programme's, else the demo site).
#[derive(clap::Args, Default)]
pub struct SiteArg {
    /// Site name from the catalogue, or LAT,LON,ELEV_M[,ZONE] (default: the programme's, else pampa-lucero)
    #[arg(long, allow_hyphen_values = true)]
    pub site: Option<String>,
}

/// The instrument of a command (default: the programme's, else the demo instrument).
#[derive(clap::Args, Default)]
pub struct InstrumentArg {
    /// Instrument name from the catalogue (default: the programme's, else lucero-1m)
    #[arg(long)]
    pub instrument: Option<String>,
}

/// The date range of a command that plans over one.
#[derive(clap::Args, Default)]
pub struct RangeArgs {
    /// First night of the range, YYYY-MM-DD (default: the programme's, else the coming night)
    #[arg(long)]
    pub from: Option<String>,
    /// Last night of the range, inclusive (default: the programme's, else 36 months after the first)
    #[arg(long)]
    pub to: Option<String>,
}

/// The distance goal of a command that plans for one.
#[derive(clap::Args, Default)]
pub struct GoalArg {
    /// Distance-precision goal, percent, for targets without their own goal_pct (default: the programme's)
    #[arg(long = "goal-pct", visible_alias = "goal", allow_hyphen_values = true)]
    pub goal_pct: Option<f64>,
}

/// The programme settings chosen on a command line (each block a command
/// has), as `rung::programme` takes them: each one given wins over the
/// programme's settings file, the user's `settings.toml` and the built-in default.
pub fn choices(
    site: Option<&SiteArg>,
    instrument: Option<&InstrumentArg>,
    limits: Option<&WindowLimits>,
    range: Option<&RangeArgs>,
    goal: Option<&GoalArg>,
) -> Choices {
    Choices {
        site: site.and_then(|x| x.site.clone()),
        instrument: instrument.and_then(|x| x.instrument.clone()),
        from: range.and_then(|x| x.from.clone()),
        to: range.and_then(|x| x.to.clone()),
        min_alt_deg: limits.and_then(|x| x.min_alt),
        sun_alt_deg: limits.and_then(|x| x.sun_alt),
        goal_pct: goal.and_then(|x| x.goal_pct),
    }
}
