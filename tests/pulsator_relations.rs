//! Period–luminosity relations by class and band (config/pulsator.toml):
//! each relation's coefficients, errors, scatter and range against the
//! published source it names (the source is written beside each check, with
//! "quoted from memory" where the paper's table was not at hand); the period
//! ranges refuse what they do not cover; the class is inferred only where one
//! class's relations cover the period.

use rung::ladder::pulsator::{ClassFrom, PulsatorClass, PulsatorConfig, Relation};

fn rel(c: PulsatorClass, band: &str) -> Relation {
    PulsatorConfig::builtin().relation(c, band).unwrap()
}

/// (slope, slope_err, pivot, zero point, zero-point error, scatter, γ, γ error, [Fe/H] ref, P range)
#[allow(clippy::type_complexity)]
fn coefficients(r: &Relation) -> (f64, f64, f64, f64, f64, f64, f64, f64, f64, (f64, f64)) {
    (
        r.slope,
        r.slope_err,
        r.pivot_log_p,
        r.zero_point_mag,
        r.zero_point_err_mag,
        r.scatter_mag,
        r.feh_coeff_mag_per_dex,
        r.feh_coeff_err_mag_per_dex,
        r.feh_ref_dex,
        (r.period_min_d, r.period_max_d),
    )
}

#[test]
fn cepheid_relations_match_their_sources() {
    use PulsatorClass::Cepheid;
    // Benedict et al. 2007, AJ 133, 1810 (HST parallaxes of ten Galactic
    // Cepheids): M_V = −2.43(±0.12)(log P − 1) − 4.05(±0.02),
    // M_I = −2.81(±0.11)(log P − 1) − 4.78(±0.03) (quoted from memory; the
    // abstract was checked, the table was not). The calibrators run from RT Aur
    // (3.73 d) to l Car (35.6 d): the valid range. Scatter: the V relation's
    // width ≈ 0.21 mag (Madore & Freedman 1991, quoted from memory), I ≈ 0.14.
    // γ = −0.2 ± 0.1 mag/dex at [Fe/H] = 0 for every Cepheid band (the range
    // of recent determinations, Gieren et al. 2018, Breuval et al. 2022;
    // quoted from memory).
    let v = rel(Cepheid, "V");
    assert_eq!(
        coefficients(&v),
        (
            -2.43,
            0.12,
            1.0,
            -4.05,
            0.02,
            0.21,
            -0.2,
            0.1,
            0.0,
            (3.7, 35.6)
        )
    );
    assert!(v.source.contains("Benedict et al. 2007, AJ 133, 1810"));
    let i = rel(Cepheid, "I");
    assert_eq!(
        coefficients(&i),
        (
            -2.81,
            0.11,
            1.0,
            -4.78,
            0.03,
            0.14,
            -0.2,
            0.1,
            0.0,
            (3.7, 35.6)
        )
    );
    // Storm et al. 2011, A&A 534, A94 (70 Milky Way Cepheids), abstract (checked):
    // M_K = −3.33(±0.09)(log P − 1) − 5.66(±0.03),
    // W_VI = −3.26(±0.11)(log P − 1) − 5.96(±0.04), W = I − 1.54 (V − I)
    // (the paper's definition, quoted from memory). Widths in the LMC: W_VI
    // ≈ 0.08 mag (Soszyński et al. 2008), K ≈ 0.09 mag (Macri et al. 2015),
    // both quoted from memory.
    let k = rel(Cepheid, "K");
    assert_eq!(
        coefficients(&k),
        (
            -3.33,
            0.09,
            1.0,
            -5.66,
            0.03,
            0.09,
            -0.2,
            0.1,
            0.0,
            (3.0, 70.0)
        )
    );
    assert!(k.source.contains("Storm et al. 2011, A&A 534, A94"));
    let w = rel(Cepheid, "W_VI");
    assert_eq!(
        coefficients(&w),
        (
            -3.26,
            0.11,
            1.0,
            -5.96,
            0.04,
            0.08,
            -0.2,
            0.1,
            0.0,
            (3.0, 70.0)
        )
    );
    let wes = w.wesenheit.as_ref().expect("W_VI is a Wesenheit index");
    assert_eq!(
        (wes.blue.as_str(), wes.red.as_str(), wes.ratio),
        ("V", "I", 1.54)
    );
    assert!(w.reddening_free() && !v.reddening_free());
    // J: Storm et al. 2011 (quoted from memory, table not checked):
    // −3.19(±0.09)(log P − 1) − 5.26(±0.03); width ≈ 0.12 mag (Persson et al.
    // 2004, quoted from memory).
    let j = rel(Cepheid, "J");
    assert_eq!(
        coefficients(&j),
        (
            -3.19,
            0.09,
            1.0,
            -5.26,
            0.03,
            0.12,
            -0.2,
            0.1,
            0.0,
            (3.0, 70.0)
        )
    );
    // H: Persson et al. 2004, AJ 128, 2239, slope −3.234 ± 0.042 (quoted from
    // memory), zero point their LMC relation at 10 d less the eclipsing-binary
    // LMC distance 18.477 mag (Pietrzyński et al. 2019): −5.59 ± 0.05 (quoted
    // from memory); width ≈ 0.11 mag.
    let h = rel(Cepheid, "H");
    assert_eq!(
        coefficients(&h),
        (
            -3.234,
            0.042,
            1.0,
            -5.59,
            0.05,
            0.11,
            -0.2,
            0.1,
            0.0,
            (3.0, 100.0)
        )
    );
    // A fact of the trade the set must keep: Cepheids are brighter and the
    // relation steeper towards the infrared (M at 10 d: V > I > J > H > K).
    let at10: Vec<f64> = [&v, &i, &j, &h, &k]
        .iter()
        .map(|r| r.abs_mag(10.0, 0.0).unwrap())
        .collect();
    assert!(at10.windows(2).all(|p| p[1] < p[0]), "{at10:?}");
    let slopes: Vec<f64> = [&v, &i, &j, &h, &k].iter().map(|r| r.slope).collect();
    assert!(slopes.windows(2).all(|p| p[1] <= p[0] + 0.06), "{slopes:?}");
}

#[test]
fn rr_lyrae_and_mira_relations_match_their_sources() {
    use PulsatorClass::{Mira, RrLyrae};
    // Bhardwaj et al. 2023, ApJL 944, L51, abstract (checked; the text copy
    // had lost its minus signs, restored in the usual form):
    // M_J = −0.44(0.03) − 1.83(0.02) log P + 0.20(0.02)[Fe/H], σ = 0.05;
    // M_H = −0.74(0.02) − 2.29(0.02) log P + 0.19(0.01)[Fe/H], σ = 0.05;
    // M_Ks = −0.80(0.02) − 2.37(0.02) log P + 0.18(0.01)[Fe/H], σ = 0.05.
    // Range 0.2–1 d, the periods of RR Lyrae stars (common practice).
    for (band, want) in [
        (
            "J",
            (
                -1.83,
                0.02,
                0.0,
                -0.44,
                0.03,
                0.05,
                0.20,
                0.02,
                0.0,
                (0.2, 1.0),
            ),
        ),
        (
            "H",
            (
                -2.29,
                0.02,
                0.0,
                -0.74,
                0.02,
                0.05,
                0.19,
                0.01,
                0.0,
                (0.2, 1.0),
            ),
        ),
        (
            "K",
            (
                -2.37,
                0.02,
                0.0,
                -0.80,
                0.02,
                0.05,
                0.18,
                0.01,
                0.0,
                (0.2, 1.0),
            ),
        ),
    ] {
        let r = rel(RrLyrae, band);
        assert_eq!(coefficients(&r), want, "{band}");
        assert!(r.source.contains("Bhardwaj et al. 2023, ApJL 944, L51"));
    }
    // M_V = 0.214(±0.047)([Fe/H] + 1.5) + 0.59(±0.03): zero point from
    // Cacciari & Clementini 2003 (abstract, checked), slope from Clementini
    // et al. 2003, AJ 125, 1309 (quoted from memory). No period term.
    let v = rel(RrLyrae, "V");
    assert_eq!(
        coefficients(&v),
        (
            0.0,
            0.0,
            0.0,
            0.59,
            0.03,
            0.10,
            0.214,
            0.047,
            -1.5,
            (0.2, 1.0)
        )
    );
    // By hand: [Fe/H] = −2.0 → M_V = 0.59 + 0.214 × (−0.5) = 0.483.
    assert!((v.abs_mag(0.55, -2.0).unwrap() - 0.483).abs() < 1e-12);
    // Whitelock, Feast & van Leeuwen 2008, MNRAS 386, 313, abstract (checked):
    // M_K = −3.51(±0.20)(log P − 2.38) − 7.25(±0.07), O-rich Galactic Miras; no
    // metallicity term. Range 100–420 d (longer-period Miras lie above it).
    let m = rel(Mira, "K");
    assert_eq!(
        coefficients(&m),
        (
            -3.51,
            0.20,
            2.38,
            -7.25,
            0.07,
            0.14,
            0.0,
            0.0,
            0.0,
            (100.0, 420.0)
        )
    );
    // By hand: P = 10^2.38 d = 239.9 d → M_K = −7.25.
    assert!((m.abs_mag(10f64.powf(2.38), 0.0).unwrap() + 7.25).abs() < 1e-12);
    // A fact of the trade: a 0.55 d RR Lyrae star is about 6 mag fainter in K
    // than a 10 d Cepheid (M_K ≈ −0.5 against −5.7).
    let rr = rel(RrLyrae, "K").abs_mag(0.55, -1.5).unwrap();
    assert!((rr + 0.456).abs() < 0.01, "{rr}");
}

#[test]
fn a_cepheid_relation_refuses_half_a_day_and_rr_lyrae_accepts_it() {
    let cfg = PulsatorConfig::builtin();
    for band in ["V", "I", "W_VI", "J", "H", "K"] {
        let e = rel(PulsatorClass::Cepheid, band)
            .abs_mag(0.55, 0.0)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("0.55 d is outside the classical Cepheid")
                && e.contains("not applied outside")
                && e.contains("class = rrlyrae"),
            "{band}: {e}"
        );
    }
    for band in ["V", "J", "H", "K"] {
        assert!(
            rel(PulsatorClass::RrLyrae, band)
                .abs_mag(0.55, -1.5)
                .is_ok()
        );
    }
    // The same through a star's settled relation: class given as cepheid.
    let e = cfg
        .star_relation(Some(PulsatorClass::Cepheid), "V", 0.55, None, None)
        .unwrap_err()
        .to_string();
    assert_eq!(
        e,
        "invalid period_d: 0.55 d is outside the classical Cepheid V relation's range 3.7–35.6 d (Benedict et al. 2007, AJ 133, 1810); it is not applied outside the periods it was calibrated on: a star this short is no classical Cepheid (RR Lyrae stars pulsate in 0.2–1 d: give class = rrlyrae)"
    );
    // A Mira relation refuses a Cepheid's period, and a long Mira.
    assert!(rel(PulsatorClass::Mira, "K").abs_mag(30.0, 0.0).is_err());
    assert!(rel(PulsatorClass::Mira, "K").abs_mag(500.0, 0.0).is_err());
}

#[test]
fn the_class_is_inferred_only_where_one_class_covers_the_period() {
    let cfg = PulsatorConfig::builtin();
    use PulsatorClass::*;
    assert_eq!(
        cfg.settle_class(None, 0.55).unwrap(),
        (RrLyrae, ClassFrom::Inferred)
    );
    assert_eq!(
        cfg.settle_class(None, 10.0).unwrap(),
        (Cepheid, ClassFrom::Inferred)
    );
    assert_eq!(
        cfg.settle_class(None, 250.0).unwrap(),
        (Mira, ClassFrom::Inferred)
    );
    assert_eq!(
        cfg.settle_class(Some(Mira), 10.0).unwrap(),
        (Mira, ClassFrom::Given)
    );
    // 2 d: between the RR Lyrae stars and the Cepheid calibrators: no class.
    let e = cfg.settle_class(None, 2.0).unwrap_err().to_string();
    assert!(
        e.contains("no relation covers a 2 d period")
            && e.contains("classical Cepheid 3–100 d")
            && e.contains("RR Lyrae star 0.2–1 d"),
        "{e}"
    );
    // A user relation that overlaps makes a period ambiguous: no inference.
    let c = PulsatorConfig::merged(
        "[relation.mira.K]\nperiod_min_d = 60.0\n",
        std::path::Path::new("user.toml"),
    )
    .unwrap();
    let e = c.settle_class(None, 65.0).unwrap_err().to_string();
    assert!(
        e.contains("classical Cepheid and Mira") && e.contains("give the star's class"),
        "{e}"
    );
    // The inference is said, and an assumed metallicity is said with its term.
    let r = cfg.star_relation(None, "K", 0.55, None, None).unwrap();
    assert_eq!(r.class_from, ClassFrom::Inferred);
    assert!(
        r.notes[0].contains("class rrlyrae inferred from the period"),
        "{:?}",
        r.notes
    );
    assert!(
        r.feh_assumed && (r.feh_dex + 1.5).abs() < 1e-12 && (r.feh_err_dex - 0.5).abs() < 1e-12
    );
    // |γ| σ[Fe/H] = 0.18 × 0.5 = 0.09 mag.
    assert!((r.sigma_feh_mag() - 0.09).abs() < 1e-12);
    assert!(
        r.notes[1].contains("-1.50 ± 0.50 dex assumed"),
        "{:?}",
        r.notes
    );
    // Given metallicity: no note, its own error.
    let r = cfg
        .star_relation(Some(RrLyrae), "K", 0.55, Some(-1.2), Some(0.1))
        .unwrap();
    assert!(r.notes.is_empty() && !r.feh_assumed);
    assert!((r.sigma_feh_mag() - 0.018).abs() < 1e-12);
}

#[test]
fn calibration_and_scatter_terms_by_hand() {
    // Cepheid K (Storm et al. 2011): at P = 30 d, log P − 1 = 0.477121;
    // σ_zp² = 0.03² + (0.477121 × 0.09)² = 0.0009 + 0.0018439 → 0.052382 mag,
    // plus [Fe/H] = −0.3 away from the reference: (0.3 × 0.1)² = 0.0009 →
    // σ_zp = √0.0036439 = 0.060365 mag.
    let k = rel(PulsatorClass::Cepheid, "K");
    assert!((k.sigma_zero_point_mag(30.0, 0.0) - 0.052_382).abs() < 1e-5);
    assert!((k.sigma_zero_point_mag(30.0, -0.3) - 0.060_365).abs() < 1e-5);
    // One star: scatter, calibration and metallicity (σ[Fe/H] = 0.2: 0.04 mag).
    let one = k.sigma_single_mag(30.0, -0.3, 0.2);
    assert!((one - (0.09f64.powi(2) + 0.0036439 + 0.04f64.powi(2)).sqrt()).abs() < 1e-5);
}

#[test]
fn each_relation_prints_in_its_own_form() {
    use PulsatorClass::{Cepheid, RrLyrae};
    // The RR Lyrae stars' optical relation is a luminosity–metallicity one
    // (no period term): M_V = 0.214 ([Fe/H] + 1.5) + 0.59 (Clementini et al.
    // 2003 slope, Cacciari & Clementini 2003 zero point, as in
    // config/pulsator.toml), by hand 0.214 [Fe/H] + 0.59 + 0.214 × 1.5 =
    // 0.214 [Fe/H] + 0.911. Never "0 (log P − 0)".
    let rr = rel(RrLyrae, "V");
    assert_eq!(
        rr.equation(),
        "M_V = 0.214 ([Fe/H] + 1.5) + 0.59 (= 0.214 [Fe/H] + 0.911)"
    );
    // The classical Cepheids' V relation keeps its period term, with γ at
    // [Fe/H] = 0 (Benedict et al. 2007 above).
    assert_eq!(
        rel(Cepheid, "V").equation(),
        "M_V = −2.43 (log P − 1) − 0.2 [Fe/H] − 4.05"
    );
    // The same text in `rung phase` for a star of the demo cluster.
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_rung"))
        .args([
            "phase",
            "--target",
            "LPO-GC1-V01",
            "--from",
            "2026-12-01",
            "--to",
            "2026-12-20",
        ])
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("RUNG_CONFIG_DIR", tempfile::tempdir().unwrap().path())
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        text.contains("M_V = 0.214 ([Fe/H] + 1.5) + 0.59 (= 0.214 [Fe/H] + 0.911)"),
        "{text}"
    );
    assert!(!text.contains("log P − 0"), "{text}");
}
