//! Coefficients and defaults of the pulsating-star method (`config/pulsator.toml`).

use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::Path;

/// The built-in coefficients and defaults (`config/pulsator.toml`).
pub const BUILTIN_CONFIG: &str = config::PULSATOR.builtin;

/// A period–luminosity relation in one band: M = a (log10 P − 1) + b.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct LeavittLaw {
    /// Slope, mag per dex of period.
    pub a: f64,
    /// 1σ error of the slope.
    pub a_err: f64,
    /// Absolute magnitude at P = 10 d.
    pub b: f64,
    /// 1σ error of `b`.
    pub b_err: f64,
    /// Intrinsic scatter of single stars about the relation, mag.
    pub scatter_mag: f64,
    /// Where the coefficients come from.
    pub source: String,
}

impl LeavittLaw {
    /// Absolute magnitude M = a (log10 P − 1) + b for period `period_d` (days).
    /// Source: the band's entry in `config/pulsator.toml`.
    pub fn abs_mag(&self, period_d: f64) -> f64 {
        self.a * (period_d.log10() - 1.0) + self.b
    }

    /// Uncertainty of M for one star, mag:
    /// σ_PL² = scatter² + b_err² + ((log10 P − 1) a_err)².
    pub fn sigma_mag(&self, period_d: f64) -> f64 {
        let x = period_d.log10() - 1.0;
        (self.scatter_mag.powi(2) + self.b_err.powi(2) + (x * self.a_err).powi(2)).sqrt()
    }
}

/// Defaults of the method (the `[defaults]` table of `config/pulsator.toml`).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct PulsatorDefaults {
    /// Phase bins of a visit plan.
    pub bins: usize,
    /// Fourier harmonics K.
    pub harmonics: usize,
    /// Phase uncertainty past which the ephemeris is stale, cycles.
    pub stale_phase: f64,
    /// Warn when coverage needs more nights than this.
    pub coverage_nights_warn: usize,
    /// Largest denominator of the day alias m/k.
    pub alias_max_denominator: u32,
    /// Per-point SNR of the default proposal.
    pub propose_snr: f64,
    /// Lowest per-point SNR of a goal plan.
    pub snr_min: f64,
    /// Highest per-point SNR of a goal plan.
    pub snr_max: f64,
    /// Extinction uncertainty as a fraction of the extinction.
    pub extinction_sigma_frac: f64,
}

/// The method's configuration: defaults and one Leavitt law per band.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct PulsatorConfig {
    /// Defaults.
    pub defaults: PulsatorDefaults,
    /// Leavitt laws by band name (U, B, V, R, I).
    pub band: BTreeMap<String, LeavittLaw>,
}

impl PulsatorConfig {
    /// The built-in configuration.
    pub fn builtin() -> Self {
        // The embedded file is checked by the unit test `builtin_config_parses`.
        config::merged(&[config::PULSATOR.builtin_layer()], Self::validated)
            .unwrap_or_else(|e| panic!("built-in config/pulsator.toml is broken: {e}"))
    }

    /// Parse a complete configuration text; `file` names it in error messages.
    pub fn parse(text: &str, file: &Path) -> Result<Self> {
        config::merged(&[Layer::new(text, file)], Self::validated)
    }

    /// The built-in configuration with the user's `pulsator.toml` (user config
    /// folder, `$RUNG_CONFIG_DIR` overrides it) merged over it key by key: a
    /// user file may set only `[defaults] bins = 12`, or add a `[band.B]` table.
    /// `extra`, a file named on the command line, is merged last.
    pub fn load(extra: Option<&Path>) -> Result<Self> {
        config::merged(&config::PULSATOR.layers(extra)?, Self::validated)
    }

    /// The built-in configuration with `text` (the content of `file`) merged over it.
    pub fn merged(text: &str, file: &Path) -> Result<Self> {
        config::merged(
            &[config::PULSATOR.builtin_layer(), Layer::new(text, file)],
            Self::validated,
        )
    }

    /// Check every value; a bad one is `RungError::Invalid` naming its dotted key.
    pub fn validated(self) -> Result<Self> {
        let bad = |field: &str, msg: &str| RungError::invalid(field, msg);
        let d = &self.defaults;
        if !(2..=200).contains(&d.bins) {
            return Err(bad("defaults.bins", "must be within 2..200"));
        }
        if !(1..=10).contains(&d.harmonics) {
            return Err(bad("defaults.harmonics", "must be within 1..10"));
        }
        if !(d.stale_phase > 0.0 && d.stale_phase <= 0.5) {
            return Err(bad(
                "defaults.stale_phase",
                "must be within (0, 0.5] cycles",
            ));
        }
        if !(1..=10).contains(&d.alias_max_denominator) {
            return Err(bad(
                "defaults.alias_max_denominator",
                "must be within 1..10",
            ));
        }
        for (f, v) in [
            ("defaults.propose_snr", d.propose_snr),
            ("defaults.snr_min", d.snr_min),
            ("defaults.snr_max", d.snr_max),
        ] {
            if !(v.is_finite() && v >= 2.0) {
                return Err(bad(f, "must be a signal-to-noise of at least 2"));
            }
        }
        if d.snr_min > d.snr_max {
            return Err(bad("defaults.snr_min", "must not exceed snr_max"));
        }
        if !(d.extinction_sigma_frac.is_finite() && (0.0..=1.0).contains(&d.extinction_sigma_frac))
        {
            return Err(bad("defaults.extinction_sigma_frac", "must be within 0..1"));
        }
        for (name, l) in &self.band {
            for (f, v) in [
                ("a", l.a),
                ("a_err", l.a_err),
                ("b", l.b),
                ("b_err", l.b_err),
                ("scatter_mag", l.scatter_mag),
            ] {
                if !v.is_finite() {
                    return Err(bad(&format!("band.{name}.{f}"), "must be a finite number"));
                }
            }
            if l.a_err < 0.0 || l.b_err < 0.0 || l.scatter_mag < 0.0 {
                return Err(bad(
                    &format!("band.{name}"),
                    "errors and scatter must not be negative",
                ));
            }
        }
        Ok(self)
    }

    /// The Leavitt law of a band, or a clear error naming the bands known.
    pub fn law(&self, band: &str) -> Result<&LeavittLaw> {
        self.band.get(band).ok_or_else(|| RungError::Unknown {
            what: "Leavitt-law band".into(),
            name: band.into(),
            hint: format!(
                "; config/pulsator.toml has {}; add a [band.{band}] table with a, b, scatter and their source",
                self.band.keys().cloned().collect::<Vec<_>>().join(", ")
            ),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_config_parses() {
        let c = PulsatorConfig::builtin();
        assert_eq!(c.defaults.bins, 10);
        assert!(c.band.contains_key("V"));
        assert!(c.law("B").is_err());
    }

    #[test]
    fn bad_config_names_its_field() {
        let bad = BUILTIN_CONFIG.replace("bins = 10", "bins = 1");
        let e = PulsatorConfig::parse(&bad, Path::new("x.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("x.toml") && e.contains("defaults.bins"), "{e}");
    }

    #[test]
    fn user_config_merges_over_builtin() {
        let c = PulsatorConfig::merged(
            "[defaults]\nbins = 12\n[band.B]\na = -2.3\na_err = 0.1\nb = -3.4\nb_err = 0.05\nscatter_mag = 0.25\nsource = \"test only\"\n",
            Path::new("user.toml"),
        )
        .unwrap();
        assert_eq!(c.defaults.bins, 12);
        assert_eq!(c.defaults.harmonics, 3);
        assert!(c.law("B").is_ok() && c.law("V").is_ok());
        let e = PulsatorConfig::merged("[defaults]\nbins = \"x\"\n", Path::new("user.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("user.toml") && e.contains("bins"), "{e}");
    }
}
