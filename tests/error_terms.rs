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
