//! Safety: a season window that holds moments with the Sun up and the target
//! inside the site's Sun-avoidance angle is flagged (DESIGN.md, safety).

use chrono::NaiveDate;
use rung::astro::frames::{CatalogPlace, Context};
use rung::astro::night::local_noon;
use rung::plan::season::{self, Constraints};
use std::ops::ControlFlow;

#[test]
fn windows_reaching_into_sunlight_near_the_sun_are_flagged() {
    let site = rung::io::sites::resolve("pampa-lucero").unwrap();
    let d = NaiveDate::from_ymd_opt(2026, 4, 10).unwrap();
    // The Sun's direction at local noon (GCRS from SOFA epv00, within 20″ of ICRS).
    let t = local_noon(&site, d).unwrap();
    let s = Context::exact(&site, t).unwrap().sun_geo_au();
    let (ra, dec) = sofars::vm::c2s(&s);
    let (ra, dec) = (sofars::vm::anp(ra).to_degrees(), dec.to_degrees());
    // 25° east of the Sun (still up just after sunset), and opposite it.
    let near = CatalogPlace::fixed_deg(ra + 25.0 / dec.to_radians().cos(), dec);
    let far = CatalogPlace::fixed_deg(ra + 180.0, -dec);
    let run = |sun_alt: f64| {
        let c = Constraints::new(5.0, sun_alt, None).unwrap();
        let mut out = Vec::new();
        season::scan(&site, &[near, far], d, d, &c, |nr| {
            out = nr.rows.to_vec();
            ControlFlow::Continue(())
        })
        .unwrap();
        out
    };
    // Sun limit at 0°: the window opens while the Sun's upper limb is still up.
    let r = run(0.0);
    assert!(r[0].observable_hours > 0.0);
    assert!(
        r[0].sun_caution,
        "target 25° from the Sun at sunset must be flagged"
    );
    assert!(!r[1].sun_caution);
    // With a twilight limit the Sun is never up inside a window.
    let r = run(-6.0);
    assert!(!r[0].sun_caution && !r[1].sun_caution);
}
