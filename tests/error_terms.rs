//! The error budget every distance method reports by term (the shared
//! `Prediction::error_terms` face) adds up, in quadrature, to the precision
//! the method states: σ_d/d = (ln 10 / 5) σ_μ (docs/science.md, Distances).
//! One demo target of each method, each on the epochs its method proposes;
//! each epoch names the band it exposes in.

use rung::astro::night::Limits;
use rung::io::sites;
use rung::io::targets::{Kind, load};
use rung::ladder::{DIST_FRAC_PER_MAG, ErrorTerm, Setting, methods, total_pct};
use rung::photometry::Photometer;
use std::path::Path;

#[test]
fn ln10_over_5_is_the_magnitude_to_distance_factor() {
    // A fact of the trade: d = 10^(μ/5 + 1) pc, so dd/d = (ln 10 / 5) dμ.
    assert!((DIST_FRAC_PER_MAG - 0.460_517_018_6).abs() < 1e-9);
    let t = ErrorTerm::from_mag("x", 0.1, false);
    assert!((t.distance_pct - 4.605_170_186).abs() < 1e-8);
    let u = ErrorTerm::from_pct("y", t.distance_pct, true);
    assert!((u.sigma_mag - 0.1).abs() < 1e-12);
    // A 3-4-5 triangle in quadrature.
    let terms = [
        ErrorTerm::from_pct("a", 3.0, false),
        ErrorTerm::from_pct("b", 4.0, true),
    ];
    assert!((total_pct(&terms) - 5.0).abs() < 1e-12);
}

#[test]
fn each_methods_terms_add_up_to_its_precision() {
    let site = sites::resolve("pampa-lucero").unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("targets-demo/targets.csv");
    let targets = load(&demo).unwrap().targets;
    let em = Photometer::demo(&site).unwrap();
    let ms = methods(&Default::default()).unwrap();
    let from = chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap();
    for (kind, name, days) in [
        (Kind::Parallax, "LPO-P01", 730),
        (Kind::Pulsator, "LPO-C05", 60),
        (Kind::Transient, "LPO-T2026a", 60),
    ] {
        let t = targets.iter().find(|t| t.name == name).unwrap();
        assert_eq!(t.kind, kind);
        let m = ms.for_kind(kind).unwrap();
        let s = Setting {
            site: &site,
            target: t,
            from,
            to: from + chrono::Days::new(days),
            limits: Limits::new(30.0, -12.0).unwrap(),
        };
        let epochs = m.propose(&s, &em).unwrap();
        // Every epoch says which bands it exposes in (the face's
        // BandExposure), the method's primary band first, and its totals are
        // their sums. The transient's visits take B, V and R (and, on the
        // first night of an unclassified candidate, the classification
        // spectrum); the other methods' one band.
        for e in &epochs {
            let want = if kind == Kind::Transient { 3 } else { 1 };
            assert!(e.exposures.len() >= want, "{name}: {e:?}");
            assert_eq!(e.exposures[0].band, t.band, "{name}");
            let sum: f64 = e.exposures.iter().map(|b| b.exptime_s).sum();
            let n: u32 = e.exposures.iter().map(|b| b.n_exposures).sum();
            assert!(
                (sum - e.exptime_s).abs() < 1e-9 && n == e.n_exposures,
                "{name}: {e:?}"
            );
        }
        let p = m.predict(&s, &em, &epochs).unwrap();
        assert!(p.distance_precision_pct.is_finite(), "{name}: {p:?}");
        assert!(!p.error_terms.is_empty(), "{name}: no error terms");
        let sum = total_pct(&p.error_terms);
        assert!(
            (sum - p.distance_precision_pct).abs() <= 1e-9 * p.distance_precision_pct,
            "{name}: terms {sum} % against stated {} %",
            p.distance_precision_pct
        );
        for e in &p.error_terms {
            assert!(
                e.sigma_mag.is_finite() && e.sigma_mag >= 0.0,
                "{name}: {e:?}"
            );
        }
    }
}

/// The photometer's table of SNRs at one instant (several stars, several
/// exposures, its sky and rates prepared once: `ExposureModel::snr_table`,
/// what the parallax method's candidate instants ask) is `snr` asked one by
/// one, to the last bit, and refuses what `snr` refuses with its words.
#[test]
fn the_photometers_snr_table_is_snr_asked_one_by_one() {
    use rung::ladder::ExposureModel;
    let site = sites::resolve("pampa-lucero").unwrap();
    let em = Photometer::demo(&site).unwrap();
    let t = rung::astro::time::Instant::from_utc_calendar(2026, 12, 2, 2, 0, 0.0).unwrap();
    let ctx = rung::astro::frames::Context::exact(&site, t).unwrap();
    let place = rung::io::targets::Target::plain("X", 61.3, -18.4).place();
    let mags = [11.0, 14.5, 18.25, 21.0];
    let exptimes = [10.0, 61.0, 300.0, 1800.0];
    for band in ["V", "I"] {
        let table = em.snr_table(&mags, band, &exptimes, &ctx, &place).unwrap();
        assert_eq!(table.len(), exptimes.len());
        for (row, t_s) in table.iter().zip(exptimes) {
            assert_eq!(row.len(), mags.len());
            for (got, m) in row.iter().zip(mags) {
                let want = em.snr(m, band, t_s, &ctx, &place).unwrap();
                assert_eq!(got.to_bits(), want.to_bits(), "{band} {m} {t_s}");
            }
        }
    }
    // A band the instrument has no throughput in, and an impossible magnitude.
    let a = em
        .snr_table(&mags, "Q", &exptimes, &ctx, &place)
        .unwrap_err();
    let b = em.snr(mags[0], "Q", exptimes[0], &ctx, &place).unwrap_err();
    assert_eq!(a.to_string(), b.to_string());
    let bad = [14.0, f64::NAN];
    let a = em
        .snr_table(&bad, "V", &exptimes, &ctx, &place)
        .unwrap_err();
    let b = em
        .snr(f64::NAN, "V", exptimes[0], &ctx, &place)
        .unwrap_err();
    assert_eq!(a.to_string(), b.to_string());
}
