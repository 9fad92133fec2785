//! Coefficients and defaults of the pulsating-star method (`config/pulsator.toml`).

use crate::config::{self, Layer};
use crate::error::{Result, RungError};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::Path;

use super::relations::{
    CLASSES, ClassDefaults, ClassFrom, PulsatorClass, Relation, RelationSpec, StarRelation,
};

/// The built-in coefficients and defaults (`config/pulsator.toml`).
pub const BUILTIN_CONFIG: &str = config::PULSATOR.builtin;

/// The older form of a relation, `[band.<name>]`: a classical-Cepheid
/// Leavitt law M = a (log10 P − 1) + b with no metallicity term. Still read
/// (a user's `pulsator.toml` may hold one) and turned into
/// `[relation.cepheid.<name>]`, valid for `period_min_d`..`period_max_d`
/// (1–100 d, the classical Cepheids' periods, when it does not say).
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
    /// Shortest valid period, days (default 1).
    #[serde(default)]
    pub period_min_d: Option<f64>,
    /// Longest valid period, days (default 100).
    #[serde(default)]
    pub period_max_d: Option<f64>,
    /// Where the coefficients come from.
    pub source: String,
}

impl LeavittLaw {
    /// Absolute magnitude M = a (log10 P − 1) + b for period `period_d` (days).
    pub fn abs_mag(&self, period_d: f64) -> f64 {
        self.a * (period_d.log10() - 1.0) + self.b
    }

    /// The same relation in the current form.
    pub fn to_spec(&self) -> RelationSpec {
        RelationSpec {
            slope: self.a,
            slope_err: self.a_err,
            pivot_log_p: 1.0,
            zero_point_mag: self.b,
            zero_point_err_mag: self.b_err,
            scatter_mag: self.scatter_mag,
            feh_coeff_mag_per_dex: 0.0,
            feh_coeff_err_mag_per_dex: 0.0,
            feh_ref_dex: 0.0,
            period_min_d: self.period_min_d.unwrap_or(1.0),
            period_max_d: self.period_max_d.unwrap_or(100.0),
            wesenheit: None,
            source: self.source.clone(),
        }
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
    /// Observations of a period-discovery cadence.
    pub discovery_epochs: usize,
    /// Peak-to-peak amplitude a discovery cadence assumes when the target
    /// gives none, mag.
    pub discovery_amplitude_mag: f64,
}

/// The method's configuration: defaults, what each class assumes, and the
/// period–luminosity relations by class and band.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct PulsatorConfig {
    /// Defaults.
    pub defaults: PulsatorDefaults,
    /// What each class assumes when a target does not say (`[class.<name>]`).
    #[serde(default)]
    pub class: BTreeMap<String, ClassDefaults>,
    /// Relations by class name and band (`[relation.<class>.<band>]`).
    #[serde(default)]
    pub relation: BTreeMap<String, BTreeMap<String, RelationSpec>>,
    /// The older form, `[band.<name>]`: classical-Cepheid Leavitt laws. Read
    /// for old user files and folded into `relation.cepheid` (a table here
    /// replaces the built-in relation of its band).
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub band: BTreeMap<String, LeavittLaw>,
    /// The photometric calibration floor by band, mag (`[calibration_floor_mag]`).
    #[serde(default)]
    pub calibration_floor_mag: BTreeMap<String, f64>,
    /// Light-curve templates by class name and band (`[template.<class>.<band>]`).
    #[serde(default)]
    pub template: BTreeMap<String, BTreeMap<String, Template>>,
}

/// A published light-curve template of one class in one band: the mean
/// magnitude from few epochs (config/pulsator.toml).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Template {
    /// Error of the mean magnitude from one epoch through the template, mag.
    pub epoch_sigma_mag: f64,
    /// The published source.
    pub source: String,
}

impl PulsatorConfig {
    /// The built-in configuration.
    pub fn builtin() -> Self {
        // The embedded file is checked by the unit test `builtin_config_parses`.
        config::merged(&[config::PULSATOR.builtin_layer()], Self::validated)
            .unwrap_or_else(|e| panic!("built-in config/pulsator.toml is broken: {e}"))
    }

    /// The calibration floor of a relation's band, mag: the band's
    /// `calibration_floor_mag`, or for a Wesenheit index W = red − R (blue −
    /// red) the two bands' floors combined as its errors are,
    /// √((1 + R)² f_red² + R² f_blue²); 0 for a band the table lacks.
    pub fn calibration_floor(&self, rel: &Relation) -> f64 {
        let f = |b: &str| self.calibration_floor_mag.get(b).copied().unwrap_or(0.0);
        match &rel.wesenheit {
            Some(w) => ((1.0 + w.ratio).powi(2) * f(&w.red).powi(2)
                + w.ratio.powi(2) * f(&w.blue).powi(2))
            .sqrt(),
            None => f(&rel.band),
        }
    }

    /// The light-curve template of a class in a band, when one is configured.
    pub fn template_for(&self, class: PulsatorClass, band: &str) -> Option<&Template> {
        self.template.get(class.as_str())?.get(band)
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
        if !(6..=500).contains(&d.discovery_epochs) {
            return Err(bad("defaults.discovery_epochs", "must be within 6..500"));
        }
        if !(d.discovery_amplitude_mag.is_finite()
            && d.discovery_amplitude_mag > 0.0
            && d.discovery_amplitude_mag <= 10.0)
        {
            return Err(bad(
                "defaults.discovery_amplitude_mag",
                "must be a peak-to-peak amplitude above 0 and at most 10 mag",
            ));
        }
        for (band, f) in &self.calibration_floor_mag {
            if !(f.is_finite() && (0.0..=0.5).contains(f)) {
                return Err(bad(
                    &format!("calibration_floor_mag.{band}"),
                    "must be within 0..0.5 mag",
                ));
            }
        }
        for (class, bands) in &self.template {
            if !is_class_key(class) {
                return Err(bad(
                    &format!("template.{class}"),
                    "is not a class: write template.cepheid, template.rrlyrae or template.mira",
                ));
            }
            for (band, t) in bands {
                if !(t.epoch_sigma_mag.is_finite()
                    && t.epoch_sigma_mag > 0.0
                    && t.epoch_sigma_mag <= 1.0)
                {
                    return Err(bad(
                        &format!("template.{class}.{band}.epoch_sigma_mag"),
                        "must be above 0 and at most 1 mag",
                    ));
                }
            }
        }
        let mut me = self;
        // The older [band.X] tables become classical-Cepheid relations.
        let legacy = std::mem::take(&mut me.band);
        for (name, l) in legacy {
            me.relation
                .entry("cepheid".into())
                .or_default()
                .insert(name, l.to_spec());
        }
        for (class, rels) in &me.relation {
            if !is_class_key(class) {
                return Err(bad(
                    &format!("relation.{class}"),
                    "is not a class: write relation.cepheid, relation.rrlyrae or relation.mira",
                ));
            }
            let c = PulsatorClass::parse(class)?;
            for (band, spec) in rels {
                Relation::from_spec(c, band, spec).validate(&format!("relation.{class}.{band}"))?;
            }
        }
        for (class, d) in &me.class {
            if !is_class_key(class) {
                return Err(bad(
                    &format!("class.{class}"),
                    "is not a class: write class.cepheid, class.rrlyrae or class.mira",
                ));
            }
            if !crate::bounds::FEH_DEX.contains(d.feh_assumed_dex) {
                return Err(bad(
                    &format!("class.{class}.feh_assumed_dex"),
                    "must be a metallicity within -5..1 dex",
                ));
            }
            if !crate::bounds::FEH_ERR_DEX.contains(d.feh_assumed_err_dex) {
                return Err(bad(
                    &format!("class.{class}.feh_assumed_err_dex"),
                    "must be within 0..2 dex",
                ));
            }
        }
        Ok(me)
    }

    /// The relation of `class` in `band` (band names match in any case), or
    /// a clear error naming the bands that class has.
    pub fn relation(&self, class: PulsatorClass, band: &str) -> Result<Relation> {
        let rels = self.relation.get(class.as_str());
        let found = rels.and_then(|r| {
            r.get_key_value(band)
                .or_else(|| r.iter().find(|(k, _)| k.eq_ignore_ascii_case(band)))
        });
        match found {
            Some((b, s)) => Ok(Relation::from_spec(class, b, s)),
            None => Err(RungError::Unknown {
                what: format!("{} relation band", class.words()),
                name: band.into(),
                hint: format!(
                    "; config/pulsator.toml has {} relations in {}; add a [relation.{}.{band}] table with its coefficients, range and source",
                    class.words(),
                    rels.map(|r| r.keys().cloned().collect::<Vec<_>>().join(", "))
                        .filter(|s| !s.is_empty())
                        .unwrap_or_else(|| "no band".into()),
                    class.as_str()
                ),
            }),
        }
    }

    /// Every relation, class by class.
    pub fn relations(&self) -> Vec<Relation> {
        let mut out = Vec::new();
        for c in CLASSES {
            if let Some(r) = self.relation.get(c.as_str()) {
                for (b, s) in r {
                    out.push(Relation::from_spec(c, b, s));
                }
            }
        }
        out
    }

    /// The classes whose relations (in any band) cover `period_d`.
    pub fn classes_covering(&self, period_d: f64) -> Vec<PulsatorClass> {
        let mut out: Vec<PulsatorClass> = Vec::new();
        for r in self.relations() {
            if r.covers(period_d) && !out.contains(&r.class) {
                out.push(r.class);
            }
        }
        out
    }

    /// The class of a star of period `period_d`: the given one, or the one
    /// class whose relations cover the period (inferred; the caller says
    /// so); an error when no class, or more than one, covers it.
    pub fn settle_class(
        &self,
        given: Option<PulsatorClass>,
        period_d: f64,
    ) -> Result<(PulsatorClass, ClassFrom)> {
        if let Some(c) = given {
            return Ok((c, ClassFrom::Given));
        }
        let cover = self.classes_covering(period_d);
        match cover.as_slice() {
            [c] => Ok((*c, ClassFrom::Inferred)),
            [] => Err(RungError::invalid(
                "class",
                format!(
                    "no relation covers a {} d period ({}): no class can be inferred and no distance given; give the class and a relation valid at this period",
                    crate::bounds::show(period_d),
                    self.ranges_text()
                ),
            )),
            many => Err(RungError::invalid(
                "class",
                format!(
                    "a {} d period fits the relations of {}: give the star's class (column class)",
                    crate::bounds::show(period_d),
                    many.iter()
                        .map(|c| c.words())
                        .collect::<Vec<_>>()
                        .join(" and ")
                ),
            )),
        }
    }

    /// "classical Cepheid 3.7–70 d, RR Lyrae star 0.2–1 d, …" for messages.
    pub fn ranges_text(&self) -> String {
        let all = self.relations();
        let mut parts = Vec::new();
        for c in CLASSES {
            let rs: Vec<&Relation> = all.iter().filter(|r| r.class == c).collect();
            if rs.is_empty() {
                continue;
            }
            let lo = rs
                .iter()
                .map(|r| r.period_min_d)
                .fold(f64::INFINITY, f64::min);
            let hi = rs.iter().map(|r| r.period_max_d).fold(0.0, f64::max);
            parts.push(format!(
                "{} {}–{} d",
                c.words(),
                crate::bounds::show(lo),
                crate::bounds::show(hi)
            ));
        }
        parts.join(", ")
    }

    /// The relation a star uses in `band`: its class (given, or inferred from
    /// the period where only one class's relations cover it), that class's
    /// relation in the band, the period checked against its range, and the
    /// metallicity (given, or the class's assumed value and error). The notes
    /// say what was inferred or assumed.
    pub fn star_relation(
        &self,
        given: Option<PulsatorClass>,
        band: &str,
        period_d: f64,
        feh_dex: Option<f64>,
        feh_err_dex: Option<f64>,
    ) -> Result<StarRelation> {
        let (class, from) = self.settle_class(given, period_d)?;
        let relation = self.relation(class, band)?;
        relation.check_period(period_d)?;
        let mut notes = Vec::new();
        if from == ClassFrom::Inferred {
            notes.push(format!(
                "class {} inferred from the period: only {} relations cover {} d; give the class to be sure",
                class.as_str(),
                class.words(),
                crate::bounds::show(period_d)
            ));
        }
        let d = self.class.get(class.as_str());
        let (feh, feh_err, assumed) = match feh_dex {
            Some(f) => (f, feh_err_dex.unwrap_or(0.0), false),
            None => (
                d.map_or(relation.feh_ref_dex, |d| d.feh_assumed_dex),
                d.map_or(0.0, |d| d.feh_assumed_err_dex),
                true,
            ),
        };
        if assumed && relation.feh_coeff_mag_per_dex != 0.0 {
            notes.push(format!(
                "[Fe/H] not given: {:+.2} ± {:.2} dex assumed for class {} (γ = {:+.2} mag/dex adds {:.3} mag)",
                feh,
                feh_err,
                class.as_str(),
                relation.feh_coeff_mag_per_dex,
                relation.sigma_feh_mag(feh_err)
            ));
        }
        Ok(StarRelation {
            relation,
            class_from: from,
            feh_dex: feh,
            feh_err_dex: feh_err,
            feh_assumed: assumed,
            notes,
        })
    }
}

/// Whether a table key is a class name as files write it (lower case).
fn is_class_key(k: &str) -> bool {
    CLASSES.iter().any(|c| c.as_str() == k)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_config_parses() {
        let c = PulsatorConfig::builtin();
        assert_eq!(c.defaults.bins, 10);
        assert!(c.relation(PulsatorClass::Cepheid, "V").is_ok());
        assert!(c.relation(PulsatorClass::Cepheid, "k").is_ok());
        let e = c
            .relation(PulsatorClass::Cepheid, "B")
            .unwrap_err()
            .to_string();
        assert!(e.contains("[relation.cepheid.B]") && e.contains("V"), "{e}");
        assert!(c.relation(PulsatorClass::Mira, "V").is_err());
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
        // The older [band.B] table is a classical-Cepheid relation, 1–100 d.
        let b = c.relation(PulsatorClass::Cepheid, "B").unwrap();
        assert_eq!(
            (b.slope, b.zero_point_mag, b.pivot_log_p),
            (-2.3, -3.4, 1.0)
        );
        assert_eq!((b.period_min_d, b.period_max_d), (1.0, 100.0));
        assert!(c.relation(PulsatorClass::Cepheid, "V").is_ok());
        // A relation key merges alone over the built-in table.
        let c = PulsatorConfig::merged(
            "[relation.cepheid.V]\nscatter_mag = 0.3\n",
            Path::new("user.toml"),
        )
        .unwrap();
        let v = c.relation(PulsatorClass::Cepheid, "V").unwrap();
        assert_eq!((v.scatter_mag, v.slope), (0.3, -2.43));
        let e = PulsatorConfig::merged("[relation.quasar.V]\nslope = 1\n", Path::new("user.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("relation.quasar"), "{e}");
        let e = PulsatorConfig::merged("[defaults]\nbins = \"x\"\n", Path::new("user.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("user.toml") && e.contains("bins"), "{e}");
    }
}
