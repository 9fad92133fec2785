//! The per-epoch astrometric error model of the parallax method
//! (src/ladder/parallax/astrometry.rs) against published figures, and its
//! scaling with exposure time and reference-star magnitude.

use rung::astro::site::Site;
use rung::ladder::parallax::astrometry::{
    Dcr, FrameRule, StarCounts, centroid_mas, effective_wavelength_angstrom,
    estimate_reference_stars, image_motion_mas, refraction_a_mas,
};

/// Han (1989, AJ 97, 607): the differential image motion of star pairs at the
/// Allegheny Observatory (0.76 m) is 0.140″ (S/600″)^0.33 t^−0.5 (S in arcsec,
/// t in s; quoted from the abstract of a later Allegheny study). Han & Gatewood
/// (1995) found 0.054″ in place of 0.140″ on Mauna Kea.
#[test]
fn image_motion_is_han_1989_at_allegheny() {
    for (s, t) in [(330.0, 1.0f64), (600.0, 10.0), (1260.0, 100.0)] {
        let han = 140.0 * (s / 600.0_f64).powf(0.33) / t.sqrt();
        let got = image_motion_mas(0.140, s, 0.76, t);
        // Han's exponent 0.33 against Lindegren's 1/3: within 0.5 % over 330″–1260″.
        assert!((got / han - 1.0).abs() < 0.005, "{s} {t}: {got} vs {han}");
    }
    // Mauna Kea, 600″, 1 s: 54 mas.
    assert!((image_motion_mas(0.054, 600.0, 0.76, 1.0) - 54.0).abs() < 1e-9);
    // Falls as t^−1/2: a 16× longer exposure moves a quarter as much.
    let a = image_motion_mas(0.140, 400.0, 1.0, 30.0);
    let b = image_motion_mas(0.140, 400.0, 1.0, 480.0);
    assert!((b / a - 0.25).abs() < 1e-12);
}

/// Filippenko (1982, PASP 94, 715), Table 1 as reproduced by CTIO's
/// "Differential Atmospheric Refraction" page: refraction relative to 5000 Å
/// at an altitude of 2 km (P = 600 mm Hg, T = 7 °C, water vapour 8 mm Hg:
/// the conditions of the table, quoted from memory), in arcsec, at
/// sec z = 1.50: 4000 Å +0.71, 6000 Å −0.37, 7000 Å −0.60, 8000 Å −0.74,
/// 9000 Å −0.84. rung's DCR is the difference of SOFA `refco`'s A at two
/// wavelengths times tan z; it must reproduce the table to 0.02″.
#[test]
fn refraction_dispersion_matches_filippenko_1982() {
    let mut site = Site::new("two-km", -30.0, -70.0, 2000.0, chrono_tz::UTC).unwrap();
    site.pressure_hpa = Some(600.0 * 1.333_224);
    site.temperature_c = 7.0;
    // 8 mm Hg of water at 7 °C is about saturation (7.5 mm Hg); the water
    // term of refco does not depend on wavelength, so it cancels anyway.
    site.humidity = 1.0;
    let tan_z = (1.5f64 * 1.5 - 1.0).sqrt();
    let a5 = refraction_a_mas(&site, 5000.0);
    for (wl, table) in [
        (4000.0, 0.71),
        (6000.0, -0.37),
        (7000.0, -0.60),
        (8000.0, -0.74),
        (9000.0, -0.84),
    ] {
        let got = (refraction_a_mas(&site, wl) - a5) * tan_z / 1000.0;
        assert!((got - table).abs() < 0.02, "{wl} Å: {got:.3}″ vs {table}″");
    }
}

/// DCR is zero for equal colours and at the zenith, grows with tan z and with
/// the colour difference, and a redder target is refracted less (its
/// effective wavelength is longer).
#[test]
fn dcr_scales_with_colour_difference_and_tan_z() {
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let v_i = (5450.0, 7980.0);
    let i_band = (7980.0, 1490.0);
    let v_band = (5450.0, 880.0);
    let same = Dcr::new(&site, i_band, v_i, 1.0, 1.0);
    assert_eq!(same.mas_per_tanz, 0.0);
    let one = Dcr::new(&site, i_band, v_i, 2.0, 1.0);
    let three = Dcr::new(&site, i_band, v_i, 4.0, 1.0);
    assert!(one.mas_per_tanz < 0.0, "a redder target is refracted less");
    // Linear to a few per cent (the dispersion of air flattens toward the red).
    assert!(
        (three.mas_per_tanz / one.mas_per_tanz - 3.0).abs() < 0.1,
        "{one:?} {three:?}"
    );
    let (dx, dy) = one.displacement_mas(0.0, 0.7);
    assert_eq!((dx, dy), (0.0, 0.0));
    let (dx, dy) = one.displacement_mas(1.0, std::f64::consts::FRAC_PI_2);
    assert!((dx - one.mas_per_tanz).abs() < 1e-12 && dy.abs() < 1e-9);
    // V is more dispersive than I: a larger DCR per magnitude of colour.
    let v = Dcr::new(&site, v_band, v_i, 2.0, 1.0);
    assert!(v.mas_per_tanz.abs() > one.mas_per_tanz.abs());
    // Order of magnitude (a fact of the trade, quoted from memory: DCR between
    // an M dwarf and its reference stars is a few to a few tens of mas at
    // tan z ≈ 1 in broad optical bands): 1–30 mas per magnitude of V−I.
    for d in [one, v] {
        assert!((1.0..30.0).contains(&d.mas_per_tanz.abs()), "{d:?}");
    }
    // The effective wavelength moves redward with V−I by
    // width²/(12 λ0 · 2.5 log10(λI/λV)) per magnitude: about 55 Å in I.
    let per_mag = effective_wavelength_angstrom(7980.0, 1490.0, 1.0, 5450.0, 7980.0) - 7980.0;
    assert!(
        (per_mag - 1490.0f64.powi(2) / (12.0 * 7980.0 * 2.5 * (7980.0f64 / 5450.0).log10())).abs()
            < 1e-9
    );
    assert!((40.0..70.0).contains(&per_mag), "{per_mag}");
}

/// The centroid of a Gaussian image: σ_FWHM/2.35 over the SNR (common
/// practice): 1.2″ at SNR 100 is 5.1 mas, and halves when the SNR doubles
/// (four times the exposure when photon-limited).
#[test]
fn centroid_error_scales_with_snr() {
    let a = centroid_mas(1.2, 100.0).unwrap();
    assert!((a - 1200.0 / 235.0).abs() < 1e-9);
    assert!((centroid_mas(1.2, 200.0).unwrap() / a - 0.5).abs() < 1e-12);
    assert!(centroid_mas(1.2, 0.0).is_err() && centroid_mas(0.0, 10.0).is_err());
}

/// Star counts grow toward the plane and toward faint magnitudes; fainter
/// reference stars are more numerous but each measured worse.
#[test]
fn reference_stars_from_the_star_counts() {
    let counts = StarCounts {
        pole_per_deg2_at_20: 1000.0,
        slope_per_mag: 0.25,
        min_latitude_deg: 10.0,
    };
    assert!((counts.brighter_than_per_deg2(20.0, 90.0) - 1000.0).abs() < 1e-9);
    assert!((counts.brighter_than_per_deg2(20.0, 30.0) - 2000.0).abs() < 1e-6);
    assert_eq!(
        counts.brighter_than_per_deg2(16.0, 2.0),
        counts.brighter_than_per_deg2(16.0, -10.0)
    );
    let rule = FrameRule {
        radius_arcmin: 5.0,
        mag_window: (-3.0, 1.0),
        faintest_mag: 0.0,
        max_stars: 1000.0,
        counts,
    };
    let (n15, m15) = estimate_reference_stars(15.0, 60.0, &rule);
    let (n18, m18) = estimate_reference_stars(18.0, 60.0, &rule);
    // Five times more stars three magnitudes fainter (10^0.75), each 3 mag fainter on average.
    assert!((n18 / n15 - 10f64.powf(0.75)).abs() < 1e-6);
    assert!((m18 - m15 - 3.0).abs() < 1e-9);
    // A bright target is measured against fainter field stars.
    let rule = FrameRule {
        faintest_mag: 18.0,
        ..rule
    };
    let (n12, m12) = estimate_reference_stars(12.0, 60.0, &rule);
    let area = std::f64::consts::PI * (5.0f64 / 60.0).powi(2);
    let want = (counts.brighter_than_per_deg2(18.0, 60.0)
        - counts.brighter_than_per_deg2(9.0, 60.0))
        * area;
    assert!(
        (n12 - want).abs() < 1e-9 && m12 > 14.0,
        "{n12} {want} {m12}"
    );
}

/// Bad input of the reference-frame columns and of a frame the star counts
/// cannot fill (docs/bad-input.md, PX1–PX4): each refused with its reason,
/// the good rows beside it kept.
#[test]
fn bad_reference_frames_are_refused_with_their_reason() {
    use rung::io::targets::parse_csv;
    use std::path::Path;
    let f = Path::new("t.csv");
    for (id, text, want) in [
        (
            "PX1",
            "name,kind,ra,dec,parallax_mas,mag,ref_star_count\nA,parallax,10,-20,40,15,2\nB,parallax,20,-20,40,15,8\n",
            "t.csv, line 2, field 'ref_star_count': 2 is not within 3..1000: a linear plate model (six constants) needs at least three reference stars, and a CCD frame holds at most a few hundred useful ones",
        ),
        (
            "PX2",
            "name,kind,ra,dec,parallax_mas,mag,color_vi_mag\nA,parallax,10,-20,40,15,12\nB,parallax,20,-20,40,15,3\n",
            "t.csv, line 2, field 'color_vi_mag': 12 mag is not within -1..8 mag: stars run from about V-I = -0.4 (the hottest) to about 5 (the coolest dwarfs seen in V)",
        ),
    ] {
        let l = parse_csv(text, f);
        let got: Vec<String> = l.problems.iter().map(|p| p.to_string()).collect();
        assert_eq!(got, vec![want.to_string()], "{id}");
        assert_eq!(l.targets.len(), 1, "{id}: the good row is kept");
    }
    // PX3: a count that is not a whole number, refused by the method.
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let em = rung::photometry::Photometer::from_name("lucero-1m", &site).unwrap();
    let mut t = rung::io::targets::Target::plain("A", 61.3, -18.4);
    t.kind = rung::io::targets::Kind::Parallax;
    t.parallax_mas = Some(40.0);
    t.mag = Some(15.0);
    t.band = "I".into();
    t.ref_star_count = Some(7.5);
    let m = rung::ladder::parallax::ParallaxMethod::builtin().unwrap();
    let s = rung::ladder::Setting {
        site: &site,
        target: &t,
        from: "2026-12-01".parse().unwrap(),
        to: "2027-01-15".parse().unwrap(),
        limits: rung::astro::night::Limits::new(30.0, -12.0).unwrap(),
    };
    let e = m.plan(&s, &em).unwrap_err().to_string();
    assert_eq!(
        e,
        "invalid ref_star_count of 'A': 7.5 is not a whole number of stars"
    );
    // PX4: a field too small to hold three reference stars: the goal verdict
    // says so (not observable, the reason in its notes), the plan refuses.
    let mut t2 = t.clone();
    t2.ref_star_count = None;
    let mut m = m;
    m.cfg.reference_field_radius_arcmin = 0.3;
    let s = rung::ladder::Setting { target: &t2, ..s };
    let e = m.plan(&s, &em).unwrap_err().to_string();
    assert!(
        e.starts_with("invalid target 'A': the star counts give only ")
            && e.contains("a linear plate model needs three; give ref_star_count and ref_mag"),
        "{e}"
    );
    let g = m.goal_plan(&s, &em, 5.0).unwrap();
    assert_eq!(
        g.prediction.verdict,
        rung::ladder::Verdict::NotObservable {
            when: Some("no usable reference frame".into())
        }
    );
    assert_eq!(g.prediction.notes[0], e);
}

/// A linear plate solution x = a + b ξ + c η fitted to N reference stars,
/// each measured with error σ, predicts the position at the centroid of its
/// stars with variance σ²/N: the variance of a least-squares prediction at
/// the design's mean, [1 ξ̄ η̄] (AᵀA)⁻¹ [1 ξ̄ η̄]ᵀ σ² (a fact of least
/// squares). Worked here on a small invented field, independently of the
/// model, so that the model's σ_ref/√N rests on a computation of its own.
#[test]
fn reference_frame_term_is_the_plate_solution_error_at_the_centroid() {
    use rung::ladder::parallax::astrometry::reference_frame_mas;
    // Seven stars in a 10′ field (arcmin offsets, invented).
    let xy = [
        (-3.1, 1.2),
        (2.4, 3.3),
        (0.7, -2.8),
        (-1.9, -0.6),
        (3.6, -1.4),
        (-0.4, 4.1),
        (1.5, 0.2),
    ];
    let n = xy.len() as f64;
    // Normal matrix of (1, ξ, η).
    let mut m = [[0.0f64; 3]; 3];
    for (x, y) in xy {
        let r = [1.0, x, y];
        for i in 0..3 {
            for j in 0..3 {
                m[i][j] += r[i] * r[j];
            }
        }
    }
    // Its inverse by cofactors.
    let det = m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
        - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
        + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0]);
    let mut inv = [[0.0f64; 3]; 3];
    for (i, row) in inv.iter_mut().enumerate() {
        for (j, x) in row.iter_mut().enumerate() {
            let (a, b) = ((j + 1) % 3, (j + 2) % 3);
            let (c, d) = ((i + 1) % 3, (i + 2) % 3);
            *x = (m[a][c] * m[b][d] - m[a][d] * m[b][c]) / det;
        }
    }
    let (mx, my) = (
        xy.iter().map(|p| p.0).sum::<f64>() / n,
        xy.iter().map(|p| p.1).sum::<f64>() / n,
    );
    let v = [1.0, mx, my];
    let mut var = 0.0;
    for i in 0..3 {
        for j in 0..3 {
            var += v[i] * inv[i][j] * v[j];
        }
    }
    let sigma_star = 6.0; // mas, one reference star's centroid
    assert!(
        (var.sqrt() * sigma_star - reference_frame_mas(sigma_star, n)).abs() < 1e-9,
        "{} vs {}",
        var.sqrt() * sigma_star,
        reference_frame_mas(sigma_star, n)
    );
    // Away from the centroid the prediction is worse: the model's term is
    // the best case (a target near the middle of its frame).
    let off = [1.0, mx + 4.0, my];
    let mut var_off = 0.0;
    for i in 0..3 {
        for j in 0..3 {
            var_off += off[i] * inv[i][j] * off[j];
        }
    }
    assert!(var_off > var);
}

/// The reference-frame term of a planned epoch follows the reference stars
/// given with the target (`ref_star_count`, `ref_mag`): each star's centroid
/// error FWHM / (2.35 SNR) (the photon-limited centroid of a Gaussian image,
/// common practice; docs/science.md, Parallax) at its own SNR in the epoch's
/// exposure, over √N for N stars (the plate solution at the centroid of its
/// stars, checked above). So: the term grows monotonically with the stars'
/// magnitude, by between √10 (photon-limited) and 10 (sky-limited) for 2.5
/// mag, and falls as 1/√N with their count; with reference stars as bright
/// as the target it is the target's own centroid term over √N; and one
/// worked value: lucero-1m's seeing of 1.3″ (config/instruments.toml) at a
/// reference SNR of 100 gives 1300 / (2.35 × 100) = 5.532 mas a star, and
/// nine stars 5.532 / 3 = 1.844 mas (computed by hand).
#[test]
fn reference_frame_term_follows_the_reference_stars_magnitude_and_count() {
    use rung::ladder::parallax::astrometry::reference_frame_mas;
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let em = rung::photometry::Photometer::from_name("lucero-1m", &site).unwrap();
    assert_eq!(rung::ladder::ExposureModel::seeing_fwhm_arcsec(&em), 1.3);
    assert!((reference_frame_mas(centroid_mas(1.3, 100.0).unwrap(), 9.0) - 1.8440).abs() < 1e-4);
    let m = rung::ladder::parallax::ParallaxMethod::builtin().unwrap();
    let target = |count: f64, ref_mag: f64| {
        let mut t = rung::io::targets::Target::plain("A", 61.3, -18.4);
        t.kind = rung::io::targets::Kind::Parallax;
        t.parallax_mas = Some(40.0);
        t.mag = Some(16.0);
        t.band = "I".into();
        t.ref_star_count = Some(count);
        t.ref_mag = Some(ref_mag);
        t
    };
    fn setting<'a>(
        site: &'a rung::astro::site::Site,
        t: &'a rung::io::targets::Target,
    ) -> rung::ladder::Setting<'a> {
        rung::ladder::Setting {
            site,
            target: t,
            from: "2026-12-01".parse().unwrap(),
            to: "2027-01-15".parse().unwrap(),
            limits: rung::astro::night::Limits::new(30.0, -12.0).unwrap(),
        }
    }
    // One epoch (its exposure and the target's SNR held fixed), evaluated
    // against each frame.
    let when = rung::astro::time::parse_instant("2026-12-05T03:30:00Z").unwrap();
    let t0 = target(9.0, 16.0);
    let fixed = m
        .epochs_at(&setting(&site, &t0), &em, &[when])
        .unwrap()
        .remove(0)
        .epoch;
    let at = |count: f64, ref_mag: f64| {
        let t = target(count, ref_mag);
        m.planned_from(&setting(&site, &t), &em, std::slice::from_ref(&fixed))
            .unwrap()
            .remove(0)
    };
    // Monotonic in the stars' magnitude, bounded by the two noise regimes.
    let mags = [13.0, 14.5, 16.0, 17.5, 19.0, 20.5];
    let terms: Vec<f64> = mags
        .iter()
        .map(|m| at(9.0, *m).terms.reference_mas)
        .collect();
    for w in terms.windows(2) {
        assert!(w[1] > w[0], "{terms:?}");
    }
    for (a, b) in [(14.5, 17.0), (16.0, 18.5), (17.5, 20.0)] {
        let r = at(9.0, b).terms.reference_mas / at(9.0, a).terms.reference_mas;
        assert!(r > 10f64.sqrt() * 0.999 && r < 10.0 * 1.001, "{a}→{b}: {r}");
    }
    // 1/√N in the count, the star's SNR unchanged.
    let e4 = at(4.0, 17.0);
    for n in [9.0, 16.0, 36.0] {
        let e = at(n, 17.0);
        assert!((e.reference_snr - e4.reference_snr).abs() < 1e-9);
        assert!(
            (e.terms.reference_mas * n.sqrt() - e4.terms.reference_mas * 2.0).abs() < 1e-9,
            "{n}"
        );
    }
    // Stars as bright as the target: its own centroid over √N; and the term
    // is FWHM / (2.35 SNR_ref) / √N at the SNR the epoch reports.
    let e = at(9.0, 16.0);
    assert!((e.reference_snr - e.epoch.snr).abs() < 1e-6 * e.epoch.snr);
    assert!((e.terms.reference_mas - e.terms.centroid_mas / 3.0).abs() < 1e-9);
    assert!((e.terms.reference_mas - 1300.0 / (2.35 * e.reference_snr) / 3.0).abs() < 1e-9);
}

/// A bright star (V = 8.9, a Cepheid anchor's brightness) planned for a
/// parallax on a 1 m telescope: at the exposure the image motion needs its
/// SNR would pass the 10,000 bound (flat fields and scintillation, not
/// photons, set the error there). It is attenuated to at most
/// `max_target_brighter_mag` (3 mag) above its reference stars (a
/// neutral-density spot; config/parallax.toml, common practice), the plan
/// succeeds with a finite exposure split to stay below saturation, every SNR
/// within the bound, and the attenuation is named.
#[test]
fn a_bright_star_is_attenuated_and_its_plan_succeeds() {
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let em = rung::photometry::Photometer::from_name("lucero-1m", &site).unwrap();
    let m = rung::ladder::parallax::ParallaxMethod::builtin().unwrap();
    let mut t = rung::io::targets::Target::plain("B", 99.5, -22.8);
    t.kind = rung::io::targets::Kind::Parallax;
    t.parallax_mas = Some(2.7);
    t.mag = Some(8.9);
    t.band = "V".into();
    let s = rung::ladder::Setting {
        site: &site,
        target: &t,
        from: "2026-12-01".parse().unwrap(),
        to: "2029-05-31".parse().unwrap(),
        limits: rung::astro::night::Limits::new(30.0, -12.0).unwrap(),
    };
    let p = m.plan(&s, &em).unwrap();
    let att = p.exposure_rule.target_attenuation_mag;
    // Estimated reference stars of the field (fainter than 16 mag at this
    // latitude): the target is dimmed by several magnitudes, to 3 mag above them.
    assert!(att > 3.0, "{att}");
    assert!((8.9 + att - (p.reference.mag - 3.0)).abs() < 1e-9);
    assert!(
        p.prediction
            .notes
            .iter()
            .any(|n| n.contains("neutral-density spot"))
    );
    assert!(!p.epochs.is_empty());
    for e in &p.epochs {
        assert!(
            e.epoch.snr > 30.0 && e.epoch.snr <= 10_000.0,
            "{}",
            e.epoch.snr
        );
        assert!(e.epoch.exptime_s.is_finite() && e.epoch.exptime_s <= 3600.0);
        assert!(e.epoch.n_exposures >= 1);
    }
    assert!(p.prediction.distance_precision_pct.is_finite());
    // A faint target is not attenuated.
    let mut f = t.clone();
    f.mag = Some(16.0);
    f.band = "I".into();
    let s = rung::ladder::Setting { target: &f, ..s };
    assert_eq!(
        m.plan(&s, &em)
            .unwrap()
            .exposure_rule
            .target_attenuation_mag,
        0.0
    );
    // PX5 (docs/bad-input.md): a negative limit is refused with its key.
    let text = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("config/parallax.toml"),
    )
    .unwrap()
    .replace(
        "max_target_brighter_mag = 3.0",
        "max_target_brighter_mag = -1.0",
    );
    let e =
        rung::ladder::parallax::ParallaxConfig::from_toml(&text, std::path::Path::new("p.toml"))
            .unwrap_err()
            .to_string();
    assert!(
        e.contains("'max_target_brighter_mag': -1 is not within 0..15 mag"),
        "{e}"
    );
}
