//! Argument blocks that several subcommands share, each a `clap::Args` struct
//! used with `#[command(flatten)]` so a flag is defined (name, type, default,
//! parsing) in one place.
//!
//! The command line is a contract: flattening must not change any
//! `rung <cmd> --help`. Where a command words a shared flag's help its own way,
//! it keeps that wording with `#[command(mut_arg("flag", |a| a.help("...")))]`
//! on its own struct (clap applies a struct's `command` attributes after its
//! fields, flattened ones included). Help text there is written as clap shows
//! it: a one-line doc comment loses its final full stop.

use anyhow::{Result, bail};
use rung::astro::frames::CatalogPlace;
use rung::astro::night::Limits;
use rung::io::angles::{parse_dec_deg, parse_ra_deg};
use rung::io::targets::Target;
use std::path::PathBuf;

/// The site and the one target of a distance-method command (`parallax`,
/// `phase`, `chase`): the demo site unless told, and the target by name from a
/// targets file (the demo programme by default) or by coordinates.
#[derive(clap::Args)]
pub struct MethodTarget {
    /// Site name from the catalogue, or LAT,LON,ELEV_M[,ZONE].
    #[arg(long, default_value = super::DEMO_SITE)]
    pub site: String,
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

/// Where to look from and at, for the one-instant commands (`where`, `snr`,
/// `exptime`): a site (required) and coordinates, or a target by name from a
/// targets file (the demo programme by default).
#[derive(clap::Args)]
pub struct Pointing {
    /// Site name from the catalogue, or LAT,LON,ELEV_M[,ZONE].
    #[arg(long)]
    pub site: String,
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

/// The altitude and Sun limits of an observing window: observed altitude at
/// least `--min-alt` (default 30°) with the Sun's centre below `--sun-alt`
/// (default −12°, nautical darkness).
#[derive(clap::Args)]
pub struct WindowLimits {
    /// Minimum altitude for the window, degrees.
    #[arg(long, default_value_t = 30.0, allow_hyphen_values = true)]
    pub min_alt: f64,
    /// The Sun must be below this altitude for the window, degrees.
    #[arg(long, default_value_t = -12.0, allow_hyphen_values = true)]
    pub sun_alt: f64,
}

impl WindowLimits {
    /// The limits checked by the library (`Limits::new` refuses values out of range).
    pub fn limits(&self) -> Result<Limits> {
        Ok(Limits::new(self.min_alt, self.sun_alt)?)
    }
}
