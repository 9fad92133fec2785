//! Parallax factors against ERFA, and the geometry of the parallactic ellipse.

mod parallax_support;

use rung::astro::time::Instant;
use rung::ladder::parallax::{parallactic_ellipse, parallax_factors, parallax_factors_at};

const MAS_PER_AU_AT_1_ARCSEC: f64 = 1000.0;

/// Source: pyerfa (tests/reference/make_parallax_fixtures.py): the
/// displacement between erfa.pmpx with and without parallax, Earth's
/// barycentric position from erfa.epv00, projected on the tangent plane. The
/// linear response (1 mas parallax scaled to 1″) must equal ϖ·(Pα, Pδ) to
/// better than 1 µas for ϖ = 1″, with rung's own epv00 (sofars) position.
#[test]
fn factors_match_erfa_displacement_linear() {
    let f = parallax_support::fixtures();
    let cases = f["factors"].as_array().unwrap();
    assert!(cases.len() >= 40);
    for c in cases {
        let ra = c["ra_deg"].as_f64().unwrap().to_radians();
        let dec = c["dec_deg"].as_f64().unwrap().to_radians();
        let (tt1, tt2) = (c["tt1"].as_f64().unwrap(), c["tt2"].as_f64().unwrap());
        let (_, eb) = sofars::eph::epv00(tt1, tt2).unwrap();
        let (pa, pd) = parallax_factors(eb[0], ra, dec);
        let ex = c["linear_disp_ra_mas_per_arcsec"].as_f64().unwrap();
        let ey = c["linear_disp_dec_mas_per_arcsec"].as_f64().unwrap();
        let dx = (pa * MAS_PER_AU_AT_1_ARCSEC - ex).abs();
        let dy = (pd * MAS_PER_AU_AT_1_ARCSEC - ey).abs();
        assert!(dx < 1e-3 && dy < 1e-3, "{c}: Δ = ({dx:.2e}, {dy:.2e}) mas");
    }
}

/// Source: pyerfa as above, the full displacement for ϖ = 1″. The difference
/// from ϖ·(Pα, Pδ) is the second-order term, bounded by ϖ|E|² (ϖ in radians,
/// E in au), about 5 µas: the first-order factors are the whole effect to
/// that level, and the bound is not loose (the term is present).
#[test]
fn factors_match_erfa_displacement_direct_to_second_order() {
    let f = parallax_support::fixtures();
    let plx_rad = (1.0f64 / 3600.0).to_radians();
    let mut largest: f64 = 0.0;
    for c in f["factors"].as_array().unwrap() {
        let ra = c["ra_deg"].as_f64().unwrap().to_radians();
        let dec = c["dec_deg"].as_f64().unwrap().to_radians();
        let e: Vec<f64> = c["earth_bary_au"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let (pa, pd) = parallax_factors([e[0], e[1], e[2]], ra, dec);
        let e2 = e[0] * e[0] + e[1] * e[1] + e[2] * e[2];
        let bound_mas = plx_rad * e2 * rung::ladder::parallax::MAS_PER_RAD;
        let dx = pa * 1000.0 - c["direct_disp_ra_mas"].as_f64().unwrap();
        let dy = pd * 1000.0 - c["direct_disp_dec_mas"].as_f64().unwrap();
        let d = dx.hypot(dy);
        assert!(d <= bound_mas, "{c}: {d:.2e} mas > bound {bound_mas:.2e}");
        largest = largest.max(d);
    }
    assert!(
        largest > 1e-4,
        "second-order term expected, found {largest:.2e} mas"
    );
}

fn year_path(ra_deg: f64, dec_deg: f64) -> Vec<(f64, f64, Instant)> {
    let t0 = Instant::from_utc_calendar(2027, 1, 1, 0, 0, 0.0).unwrap();
    (0..365)
        .map(|d| {
            let t = t0.add_seconds(d as f64 * 86_400.0);
            let (a, b) = parallax_factors_at(t, ra_deg.to_radians(), dec_deg.to_radians()).unwrap();
            (a, b, t)
        })
        .collect()
}

/// Principal semi-axes (au) and major-axis position angle (deg, 0–180) of a
/// path traced uniformly in time: covariance eigenvalues are a²/2 and b²/2.
fn principal_axes(path: &[(f64, f64, Instant)]) -> (f64, f64, f64) {
    let n = path.len() as f64;
    let mx = path.iter().map(|p| p.0).sum::<f64>() / n;
    let my = path.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx = path.iter().map(|p| (p.0 - mx).powi(2)).sum::<f64>() / n;
    let syy = path.iter().map(|p| (p.1 - my).powi(2)).sum::<f64>() / n;
    let sxy = path.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum::<f64>() / n;
    let tr = sxx + syy;
    let det = sxx * syy - sxy * sxy;
    let disc = (tr * tr / 4.0 - det).max(0.0).sqrt();
    let l1 = tr / 2.0 + disc;
    let l2 = (tr / 2.0 - disc).max(0.0);
    // Eigenvector of l1: (sxy, l1 − sxx) in (east, north); PA from north through east.
    let (e, nn) = if sxy.abs() > 1e-15 {
        (sxy, l1 - sxx)
    } else if sxx >= syy {
        (1.0, 0.0)
    } else {
        (0.0, 1.0)
    };
    let pa = e.atan2(nn).to_degrees().rem_euclid(180.0);
    ((2.0 * l1).sqrt(), (2.0 * l2).sqrt(), pa)
}

/// Green, Spherical Astronomy (quoted from memory): the parallactic ellipse has
/// semi-axes ϖ and ϖ|sin β|, the major axis parallel to the ecliptic. The
/// analytic ellipse is compared with the path traced by the epv00 factors over
/// a year; they differ by the orbit's eccentricity and the Sun's barycentric
/// wobble (a few per cent of 1 au).
#[test]
fn ellipse_semi_axes_follow_ecliptic_latitude() {
    for (ra, dec) in [
        (61.3f64, -18.4f64),
        (189.7, -27.6),
        (131.6, -71.3),
        (334.1, -1.3),
        (250.3, 52.0),
    ] {
        let el = parallactic_ellipse(ra.to_radians(), dec.to_radians(), 1.0);
        let (a, b, pa) = principal_axes(&year_path(ra, dec));
        assert!(
            (a - el.semi_major_mas).abs() < 0.03,
            "{ra},{dec}: a {a} vs {}",
            el.semi_major_mas
        );
        assert!(
            (b - el.semi_minor_mas).abs() < 0.03,
            "{ra},{dec}: b {b} vs {}",
            el.semi_minor_mas
        );
        assert!(
            (b - el.ecliptic_lat_deg.to_radians().sin().abs()).abs() < 0.03,
            "{ra},{dec}: b {b} vs |sin β|"
        );
        if el.semi_minor_mas < 0.8 {
            let d = (pa - el.pa_major_deg).rem_euclid(180.0);
            let d = d.min(180.0 - d);
            assert!(d < 3.0, "{ra},{dec}: PA {pa} vs {}", el.pa_major_deg);
        }
    }
}

/// Green (from memory): a star on the ecliptic moves along a line, one at the
/// ecliptic pole on a circle of radius ϖ.
#[test]
fn ecliptic_star_traces_line_and_pole_star_circle() {
    // Points on the ecliptic (β = 0) and the south ecliptic pole, in ICRS via SOFA eceq06.
    let (ra_on, dec_on) = sofars::coords::eceq06(2451545.0, 0.0, 90f64.to_radians(), 0.0);
    let (ra_on, dec_on) = (ra_on.to_degrees(), dec_on.to_degrees());
    let on = parallactic_ellipse(ra_on.to_radians(), dec_on.to_radians(), 1.0);
    assert!(
        on.ecliptic_lat_deg.abs() < 1e-9,
        "β = {}",
        on.ecliptic_lat_deg
    );
    assert!(on.semi_minor_mas < 1e-9);
    let (a, b, _) = principal_axes(&year_path(ra_on, dec_on));
    assert!(b / a < 0.02, "line expected: b/a = {}", b / a);
    let (ra_p, dec_p) = sofars::coords::eceq06(2451545.0, 0.0, 0.0, -std::f64::consts::FRAC_PI_2);
    let (ra_p, dec_p) = (ra_p.to_degrees(), dec_p.to_degrees());
    let pole = parallactic_ellipse(ra_p.to_radians(), dec_p.to_radians(), 1.0);
    assert!((pole.semi_minor_mas - 1.0).abs() < 1e-9);
    let (a, b, _) = principal_axes(&year_path(ra_p, dec_p));
    assert!(
        (a - 1.0).abs() < 0.03 && (b / a) > 0.97,
        "circle expected: a {a}, b {b}"
    );
    // And the radius stays within the orbit's eccentricity (±1.7 %) plus the barycentric wobble.
    for (x, y, _) in year_path(ra_p, dec_p) {
        let r = x.hypot(y);
        assert!((r - 1.0).abs() < 0.03, "r = {r}");
    }
}

/// Fact of the trade (Green, from memory): the extrema of Pα fall about six
/// months apart (the baseline is the diameter of the Earth's orbit), near ±1
/// au and of opposite sign.
#[test]
fn ra_factor_extrema_six_months_apart() {
    for (ra, dec) in [(61.3, -18.4), (189.7, -27.6), (12.0, -31.2)] {
        let path = year_path(ra, dec);
        let imax = (0..path.len())
            .max_by(|i, j| path[*i].0.total_cmp(&path[*j].0))
            .unwrap();
        let imin = (0..path.len())
            .min_by(|i, j| path[*i].0.total_cmp(&path[*j].0))
            .unwrap();
        let gap = (imax as i64 - imin as i64).abs();
        let gap = gap.min(365 - gap);
        assert!(
            (gap - 182).abs() <= 6,
            "{ra},{dec}: extrema {gap} days apart"
        );
        assert!(path[imax].0 > 0.9 && path[imin].0 < -0.9);
    }
}

/// The factors are the displacement per unit parallax: the tangent-plane
/// components of −(E − (E·u)u) (definition), checked on one hand-made vector.
#[test]
fn factors_sign_convention() {
    // Earth on the +x axis; a star at α = 90°, δ = 0 is displaced along −E = −x.
    let (pa, pd) = parallax_factors([1.0, 0.0, 0.0], 90f64.to_radians(), 0.0);
    // East unit vector at α = 90° is (−1, 0, 0): the displacement −E projected on east is +1.
    assert!((pa - 1.0).abs() < 1e-12 && pd.abs() < 1e-12);
    let (pa, pd) = parallax_factors([0.0, 0.0, 1.0], 0.0, 0.0);
    // North unit vector at (0, 0) is (0, 0, 1): displacement −E projected on north is −1.
    assert!(pa.abs() < 1e-12 && (pd + 1.0).abs() < 1e-12);
}
