//! Period–luminosity relations by class of pulsator and band
//! (`config/pulsator.toml`, `[relation.<class>.<band>]`; docs/science.md,
//! Pulsating stars).
//!
//! One form covers every relation rung ships:
//!
//! M = slope (log10 P − pivot_log_p) + zero_point + γ ([Fe/H] − feh_ref),
//!
//! a Leavitt law (Cepheids, Miras; γ the metallicity term), a
//! period–luminosity–metallicity relation (RR Lyrae in the near-infrared) or
//! a luminosity–metallicity relation (RR Lyrae in V: slope 0). Each relation
//! carries its coefficients with their errors, the intrinsic scatter of single
//! stars about it, its valid period range and its published source. A period
//! outside the range is refused, never extrapolated silently.
//!
//! The error of M for one star splits into three terms that behave
//! differently when the stars of a field are combined (σ_μ² = σ_PL²/N +
//! σ_zp² + (γ σ[Fe/H])² + …):
//! - the intrinsic scatter `scatter_mag` (each star its own draw: it falls as
//!   1/√N);
//! - the calibration of the relation, [`Relation::sigma_zero_point_mag`]
//!   (shared by every star calibrated with it: it does not fall);
//! - the metallicity term, [`Relation::sigma_feh_mag`] = |γ| σ[Fe/H] (shared
//!   when the stars share one metallicity, as a galaxy's field does).

use crate::error::{Result, RungError};
use serde::{Deserialize, Serialize};

/// The class of a pulsating star, which picks its relation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub enum PulsatorClass {
    /// Classical (type I, δ Cephei) Cepheid.
    #[serde(rename = "cepheid")]
    Cepheid,
    /// RR Lyrae star.
    #[serde(rename = "rrlyrae")]
    RrLyrae,
    /// Mira (oxygen-rich long-period variable).
    #[serde(rename = "mira")]
    Mira,
}

/// Every class, in the order messages list them.
pub const CLASSES: [PulsatorClass; 3] = [
    PulsatorClass::Cepheid,
    PulsatorClass::RrLyrae,
    PulsatorClass::Mira,
];

/// The names the `class` column accepts (lower case; any case is read).
pub const CLASS_NAMES: [&str; 3] = crate::io::kinds::PULSATOR_CLASSES;

impl PulsatorClass {
    /// The name in files, options and JSON (`cepheid`, `rrlyrae`, `mira`).
    pub fn as_str(self) -> &'static str {
        match self {
            PulsatorClass::Cepheid => "cepheid",
            PulsatorClass::RrLyrae => "rrlyrae",
            PulsatorClass::Mira => "mira",
        }
    }

    /// Words for messages ("classical Cepheid", "RR Lyrae star", "Mira").
    pub fn words(self) -> &'static str {
        match self {
            PulsatorClass::Cepheid => "classical Cepheid",
            PulsatorClass::RrLyrae => "RR Lyrae star",
            PulsatorClass::Mira => "Mira",
        }
    }

    /// Parse a class name (any case; `rr lyrae`, `rr-lyrae`, `rrl` and
    /// `rrab`/`rrc` read as `rrlyrae`; `dcep`, `classical cepheid` as
    /// `cepheid`). An error lists the names known.
    pub fn parse(text: &str) -> Result<Self> {
        let t: String = text
            .trim()
            .to_ascii_lowercase()
            .chars()
            .filter(|c| !matches!(c, ' ' | '-' | '_'))
            .collect();
        match t.as_str() {
            "cepheid" | "classicalcepheid" | "dcep" | "deltacephei" => Ok(PulsatorClass::Cepheid),
            "rrlyrae" | "rrl" | "rrab" | "rrc" | "rrlyr" => Ok(PulsatorClass::RrLyrae),
            "mira" | "miras" => Ok(PulsatorClass::Mira),
            _ => Err(RungError::invalid(
                "class",
                format!(
                    "'{}' is not a pulsator class rung has relations for: {}",
                    text.trim(),
                    CLASS_NAMES.join(", ")
                ),
            )),
        }
    }
}

impl std::fmt::Display for PulsatorClass {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A reddening-free Wesenheit index W = m_red − R (m_blue − m_red) built
/// from two bands (Madore 1982, ApJ 253, 575; quoted from memory).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Wesenheit {
    /// The bluer band (V of W(V,I)).
    pub blue: String,
    /// The redder band (I of W(V,I)).
    pub red: String,
    /// R = A_red / (A_blue − A_red), the ratio of total to selective
    /// extinction for the pair.
    pub ratio: f64,
}

impl Wesenheit {
    /// The index W = m_red − R (m_blue − m_red) from the two magnitudes.
    pub fn index(&self, m_blue: f64, m_red: f64) -> f64 {
        m_red - self.ratio * (m_blue - m_red)
    }

    /// The index's error from the two bands' independent errors:
    /// σ_W² = (1 + R)² σ_red² + R² σ_blue².
    pub fn sigma(&self, sigma_blue: f64, sigma_red: f64) -> f64 {
        ((1.0 + self.ratio).powi(2) * sigma_red.powi(2) + self.ratio.powi(2) * sigma_blue.powi(2))
            .sqrt()
    }
}

/// One period–luminosity relation as written in `config/pulsator.toml`.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RelationSpec {
    /// Slope, mag per dex of period (0 for a luminosity–metallicity relation).
    pub slope: f64,
    /// Its 1σ error.
    pub slope_err: f64,
    /// The log10 P (P in days) at which the zero point is given.
    pub pivot_log_p: f64,
    /// Absolute magnitude at the pivot period and the reference metallicity.
    pub zero_point_mag: f64,
    /// Its 1σ error.
    pub zero_point_err_mag: f64,
    /// Intrinsic scatter of single stars about the relation, mag.
    pub scatter_mag: f64,
    /// Metallicity term γ = dM/d[Fe/H], mag per dex.
    #[serde(default)]
    pub feh_coeff_mag_per_dex: f64,
    /// Its 1σ error.
    #[serde(default)]
    pub feh_coeff_err_mag_per_dex: f64,
    /// The [Fe/H] at which the zero point is given, dex.
    #[serde(default)]
    pub feh_ref_dex: f64,
    /// Shortest period the relation is valid for, days.
    pub period_min_d: f64,
    /// Longest period the relation is valid for, days.
    pub period_max_d: f64,
    /// The relation is for a Wesenheit index of two bands (reddening-free).
    #[serde(default)]
    pub wesenheit: Option<Wesenheit>,
    /// Where the coefficients come from.
    pub source: String,
}

/// A period–luminosity relation for one class of pulsator in one band: the
/// public face the methods (and a field of many stars) combine stars with.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Relation {
    /// The class of star it is for.
    pub class: PulsatorClass,
    /// The band (`V`, `I`, `J`, `H`, `K`) or index (`W_VI`).
    pub band: String,
    /// Slope, mag per dex of period.
    pub slope: f64,
    /// Its 1σ error.
    pub slope_err: f64,
    /// log10 P of the zero point.
    pub pivot_log_p: f64,
    /// Absolute magnitude at the pivot and the reference metallicity, mag.
    pub zero_point_mag: f64,
    /// Its 1σ error, mag.
    pub zero_point_err_mag: f64,
    /// Intrinsic scatter σ_PL of single stars about the relation, mag.
    pub scatter_mag: f64,
    /// Metallicity term γ, mag per dex.
    pub feh_coeff_mag_per_dex: f64,
    /// Its 1σ error.
    pub feh_coeff_err_mag_per_dex: f64,
    /// The reference metallicity [Fe/H], dex.
    pub feh_ref_dex: f64,
    /// Valid period range, days.
    pub period_min_d: f64,
    /// Valid period range, days.
    pub period_max_d: f64,
    /// The two bands and the ratio of a Wesenheit index (then reddening-free).
    pub wesenheit: Option<Wesenheit>,
    /// Published source of the coefficients.
    pub source: String,
}

impl Relation {
    /// The relation of `spec` for `class` in `band`.
    pub fn from_spec(class: PulsatorClass, band: &str, s: &RelationSpec) -> Self {
        Relation {
            class,
            band: band.to_string(),
            slope: s.slope,
            slope_err: s.slope_err,
            pivot_log_p: s.pivot_log_p,
            zero_point_mag: s.zero_point_mag,
            zero_point_err_mag: s.zero_point_err_mag,
            scatter_mag: s.scatter_mag,
            feh_coeff_mag_per_dex: s.feh_coeff_mag_per_dex,
            feh_coeff_err_mag_per_dex: s.feh_coeff_err_mag_per_dex,
            feh_ref_dex: s.feh_ref_dex,
            period_min_d: s.period_min_d,
            period_max_d: s.period_max_d,
            wesenheit: s.wesenheit.clone(),
            source: s.source.clone(),
        }
    }

    /// Whether extinction cancels out of it (a Wesenheit index).
    pub fn reddening_free(&self) -> bool {
        self.wesenheit.is_some()
    }

    /// Whether `period_d` (days) lies in the valid range.
    pub fn covers(&self, period_d: f64) -> bool {
        period_d >= self.period_min_d && period_d <= self.period_max_d
    }

    /// `Ok` when the relation is valid at `period_d`, else an error that says
    /// the range, the relation and what to do.
    pub fn check_period(&self, period_d: f64) -> Result<()> {
        if self.covers(period_d) {
            return Ok(());
        }
        Err(RungError::invalid(
            "period_d",
            format!(
                "{} d is outside the {} {} relation's range {}–{} d ({}); it is not applied outside the periods it was calibrated on{}",
                crate::bounds::show(period_d),
                self.class.words(),
                self.band,
                crate::bounds::show(self.period_min_d),
                crate::bounds::show(self.period_max_d),
                short_source(&self.source),
                match self.class {
                    PulsatorClass::Cepheid if period_d < 1.0 =>
                        ": a star this short is no classical Cepheid (RR Lyrae stars pulsate in 0.2–1 d: give class = rrlyrae)",
                    PulsatorClass::RrLyrae if period_d > 1.0 =>
                        ": RR Lyrae stars pulsate in 0.2–1 d (give class = cepheid or mira for a longer period)",
                    _ => "",
                }
            ),
        ))
    }

    /// The relation in its own form, for text: a Leavitt law as
    /// `M_V = −2.43 (log P − 1) − 4.05` (with its `γ [Fe/H]` term when it
    /// has one) and a luminosity–metallicity relation, without a period term
    /// (the RR Lyrae stars' optical one), as
    /// `M_V = 0.214 ([Fe/H] + 1.5) + 0.59 (= 0.214 [Fe/H] + 0.911)`: never a
    /// zero slope printed as a period term. Coefficients as configured.
    pub fn equation(&self) -> String {
        let m = format!("M_{}", self.band);
        // " + x" / " − x" after a first term.
        let signed = |x: f64| {
            if x < 0.0 {
                format!(" − {}", -x)
            } else {
                format!(" + {x}")
            }
        };
        let first = |x: f64| {
            if x < 0.0 {
                format!("−{}", -x)
            } else {
                format!("{x}")
            }
        };
        // "(log P − 1)", "log P" at a zero pivot; the same for [Fe/H].
        let lever = |name: &str, at: f64| {
            if at == 0.0 {
                name.to_string()
            } else {
                format!("({name}{})", signed(-at))
            }
        };
        let has_p = self.slope != 0.0;
        let has_feh = self.feh_coeff_mag_per_dex != 0.0;
        let mut out = format!("{m} = ");
        if has_p {
            out += &format!("{} {}", first(self.slope), lever("log P", self.pivot_log_p));
        }
        if has_feh {
            let g = self.feh_coeff_mag_per_dex;
            let t = lever("[Fe/H]", self.feh_ref_dex);
            if has_p {
                out += &format!("{} {t}", signed(g));
            } else {
                out += &format!("{} {t}", first(g));
            }
        }
        if has_p || has_feh {
            out += &signed(self.zero_point_mag);
        } else {
            out += &first(self.zero_point_mag);
        }
        if !has_p && has_feh && self.feh_ref_dex != 0.0 {
            // The same line as a [Fe/H] + b, rounded to the coefficients' 0.001 mag.
            let b = self.zero_point_mag - self.feh_coeff_mag_per_dex * self.feh_ref_dex;
            out += &format!(
                " (= {} [Fe/H]{})",
                first(self.feh_coeff_mag_per_dex),
                signed((b * 1000.0).round() / 1000.0)
            );
        }
        out
    }

    /// Absolute magnitude M = slope (log10 P − pivot) + zero point +
    /// γ ([Fe/H] − feh_ref) at `period_d` (days) and `feh_dex` (dex).
    /// Refuses a period outside the valid range. Source: the relation's
    /// `source` (config/pulsator.toml).
    pub fn abs_mag(&self, period_d: f64, feh_dex: f64) -> Result<f64> {
        self.check_period(period_d)?;
        Ok(self.abs_mag_unchecked(period_d, feh_dex))
    }

    /// The same without the range check (for tables and tests of the form).
    pub fn abs_mag_unchecked(&self, period_d: f64, feh_dex: f64) -> f64 {
        self.slope * (period_d.log10() - self.pivot_log_p)
            + self.zero_point_mag
            + self.feh_coeff_mag_per_dex * (feh_dex - self.feh_ref_dex)
    }

    /// The calibration error of M at `period_d` and `feh_dex`, mag: the zero
    /// point's, the slope's lever arm and the metallicity coefficient's lever
    /// arm in quadrature, σ_zp² = σ_b² + ((log P − pivot) σ_a)² +
    /// (([Fe/H] − feh_ref) σ_γ)² (the errors taken as independent, the zero
    /// point being quoted at the pivot). Shared by every star calibrated with
    /// this relation: it does not fall as stars are added.
    pub fn sigma_zero_point_mag(&self, period_d: f64, feh_dex: f64) -> f64 {
        let x = period_d.log10() - self.pivot_log_p;
        let z = feh_dex - self.feh_ref_dex;
        (self.zero_point_err_mag.powi(2)
            + (x * self.slope_err).powi(2)
            + (z * self.feh_coeff_err_mag_per_dex).powi(2))
        .sqrt()
    }

    /// The metallicity term of M's error, |γ| σ[Fe/H] (mag), for a
    /// metallicity known to `feh_err_dex`.
    pub fn sigma_feh_mag(&self, feh_err_dex: f64) -> f64 {
        self.feh_coeff_mag_per_dex.abs() * feh_err_dex
    }

    /// The whole error of M for one star (mag): scatter, calibration and
    /// metallicity terms in quadrature.
    pub fn sigma_single_mag(&self, period_d: f64, feh_dex: f64, feh_err_dex: f64) -> f64 {
        (self.scatter_mag.powi(2)
            + self.sigma_zero_point_mag(period_d, feh_dex).powi(2)
            + self.sigma_feh_mag(feh_err_dex).powi(2))
        .sqrt()
    }

    /// Check the coefficients; `key` is the dotted key for messages.
    pub fn validate(&self, key: &str) -> Result<()> {
        let bad = |f: &str, m: &str| RungError::invalid(format!("{key}.{f}"), m.to_string());
        for (f, v) in [
            ("slope", self.slope),
            ("slope_err", self.slope_err),
            ("pivot_log_p", self.pivot_log_p),
            ("zero_point_mag", self.zero_point_mag),
            ("zero_point_err_mag", self.zero_point_err_mag),
            ("scatter_mag", self.scatter_mag),
            ("feh_coeff_mag_per_dex", self.feh_coeff_mag_per_dex),
            ("feh_coeff_err_mag_per_dex", self.feh_coeff_err_mag_per_dex),
            ("feh_ref_dex", self.feh_ref_dex),
            ("period_min_d", self.period_min_d),
            ("period_max_d", self.period_max_d),
        ] {
            if !v.is_finite() {
                return Err(bad(f, "must be a finite number"));
            }
        }
        for (f, v) in [
            ("slope_err", self.slope_err),
            ("zero_point_err_mag", self.zero_point_err_mag),
            ("scatter_mag", self.scatter_mag),
            ("feh_coeff_err_mag_per_dex", self.feh_coeff_err_mag_per_dex),
        ] {
            if !(0.0..=5.0).contains(&v) {
                return Err(bad(f, "errors and scatter must be within 0..5 mag"));
            }
        }
        if !(crate::bounds::PERIOD_D.contains(self.period_min_d)
            && crate::bounds::PERIOD_D.contains(self.period_max_d)
            && self.period_min_d < self.period_max_d)
        {
            return Err(bad(
                "period_min_d",
                "the valid range must run from a shorter to a longer period, both within 0.01..3000 d",
            ));
        }
        if let Some(w) = &self.wesenheit
            && !(w.ratio.is_finite() && w.ratio > 0.0 && w.ratio < 10.0)
        {
            return Err(bad("wesenheit.ratio", "must be within (0, 10)"));
        }
        if self.source.trim().is_empty() {
            return Err(bad(
                "source",
                "name the published source of the coefficients",
            ));
        }
        Ok(())
    }
}

/// The first clause of a source (up to the first ';' or '('), for messages.
fn short_source(s: &str) -> &str {
    let end = s.find([';', '(']).unwrap_or(s.len());
    s[..end].trim().trim_end_matches(',')
}

/// What the method assumes of a class when a target does not say (the
/// `[class.<name>]` tables of `config/pulsator.toml`).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ClassDefaults {
    /// [Fe/H] assumed for a star of this class whose metallicity is not given, dex.
    pub feh_assumed_dex: f64,
    /// Its 1σ uncertainty, dex (it enters the error through γ).
    pub feh_assumed_err_dex: f64,
    /// Why these values.
    pub source: String,
}

/// How a star's class was settled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum ClassFrom {
    /// Given in the targets file or on the command line.
    #[serde(rename = "given")]
    Given,
    /// Inferred from the period: only this class's relations cover it.
    #[serde(rename = "inferred")]
    Inferred,
}

/// The relation a star uses, with the class and metallicity it was chosen by.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StarRelation {
    /// The relation.
    pub relation: Relation,
    /// Given or inferred.
    pub class_from: ClassFrom,
    /// [Fe/H] used, dex.
    pub feh_dex: f64,
    /// Its uncertainty, dex.
    pub feh_err_dex: f64,
    /// Whether [Fe/H] was assumed (not given).
    pub feh_assumed: bool,
    /// What the output must say about these choices.
    pub notes: Vec<String>,
}

impl StarRelation {
    /// M for the star's period (range checked at selection).
    pub fn abs_mag(&self, period_d: f64) -> f64 {
        self.relation.abs_mag_unchecked(period_d, self.feh_dex)
    }
    /// The calibration term at the star's period, mag.
    pub fn sigma_zero_point_mag(&self, period_d: f64) -> f64 {
        self.relation.sigma_zero_point_mag(period_d, self.feh_dex)
    }
    /// The metallicity term |γ| σ[Fe/H], mag.
    pub fn sigma_feh_mag(&self) -> f64 {
        self.relation.sigma_feh_mag(self.feh_err_dex)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn class_names_parse() {
        assert_eq!(
            PulsatorClass::parse("RR Lyrae").unwrap(),
            PulsatorClass::RrLyrae
        );
        assert_eq!(
            PulsatorClass::parse("rrab").unwrap(),
            PulsatorClass::RrLyrae
        );
        assert_eq!(
            PulsatorClass::parse(" Cepheid ").unwrap(),
            PulsatorClass::Cepheid
        );
        assert_eq!(PulsatorClass::parse("MIRA").unwrap(), PulsatorClass::Mira);
        let e = PulsatorClass::parse("quasar").unwrap_err().to_string();
        assert!(e.contains("cepheid, rrlyrae, mira"), "{e}");
        for c in CLASSES {
            assert_eq!(PulsatorClass::parse(c.as_str()).unwrap(), c);
        }
    }

    #[test]
    fn wesenheit_index_and_its_error() {
        // W = I − 1.55 (V − I): V = 12.0, I = 11.2 → W = 11.2 − 1.24 = 9.96.
        let w = Wesenheit {
            blue: "V".into(),
            red: "I".into(),
            ratio: 1.55,
        };
        assert!((w.index(12.0, 11.2) - 9.96).abs() < 1e-12);
        // σ_W² = 2.55² 0.01² + 1.55² 0.01² → 0.02984 mag.
        assert!(
            (w.sigma(0.01, 0.01) - (2.55f64.powi(2) + 1.55f64.powi(2)).sqrt() * 0.01).abs() < 1e-12
        );
    }
}
