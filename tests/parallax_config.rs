//! The parallax configuration (config/parallax.toml): the built-in defaults
//! load, and a bad file is refused naming the file, line and key.

use rung::ladder::parallax::{DEFAULT_CONFIG, FactorAxis, ParallaxConfig};
use std::path::Path;

#[test]
fn builtin_defaults_load() {
    let c = ParallaxConfig::builtin().unwrap();
    // Common practice (docs/science.md): epochs within ±1 h of the meridian, a
    // per-epoch floor of 1-2 mas, a two-year baseline, an absolute correction
    // known to a few tenths of a mas; Han (1989): 0.140″ image motion.
    assert_eq!(c.ha_limit_h, 1.0);
    assert!((1.0..=2.0).contains(&c.floor_mas));
    assert_eq!(c.min_baseline_yr, 2.0);
    assert_eq!(c.absolute_correction_mas, 0.5);
    assert_eq!(c.image_motion_arcsec, 0.140);
    assert_eq!(c.sun_alt_deg, None);
    assert_eq!(c.factor_axis, FactorAxis::Combined);
    assert!(c.epochs_per_season <= c.max_epochs_per_season);
}

#[test]
fn bad_values_name_file_line_and_key() {
    let f = Path::new("my-parallax.toml");
    let text = DEFAULT_CONFIG.replace("floor_mas = 1.5", "floor_mas = -1.0");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    let line = DEFAULT_CONFIG
        .lines()
        .position(|l| l.starts_with("floor_mas"))
        .unwrap()
        + 1;
    assert!(
        e.contains("my-parallax.toml")
            && e.contains(&format!("line {line}"))
            && e.contains("floor_mas"),
        "{e}"
    );

    let text = DEFAULT_CONFIG.replace("factor_axis = \"combined\"", "factor_axis = \"sideways\"");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("my-parallax.toml") && e.contains("line"), "{e}");

    let text = format!("{DEFAULT_CONFIG}\nfloor_mass = 2.0\n");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("floor_mass"), "{e}");

    let text = DEFAULT_CONFIG.replace("max_epochs_per_season = 10", "max_epochs_per_season = 1");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("max_epochs_per_season"), "{e}");

    let text = DEFAULT_CONFIG.replace("factor_fraction = 0.25", "factor_fraction = 1.2");
    assert!(ParallaxConfig::from_toml(&text, f).is_err());

    // The twilight limit, when given, is a Sun altitude below the horizon.
    let text = DEFAULT_CONFIG.replace("# sun_alt_deg = -10.0", "sun_alt_deg = 5.0");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("sun_alt_deg"), "{e}");
    let text = DEFAULT_CONFIG.replace("# sun_alt_deg = -10.0", "sun_alt_deg = -10.0");
    assert_eq!(
        ParallaxConfig::from_toml(&text, f).unwrap().sun_alt_deg,
        Some(-10.0)
    );

    // Fewer than two coordinates' worth of epochs, or a window backwards.
    let text = DEFAULT_CONFIG.replace("min_epochs = 10", "min_epochs = 2");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("min_epochs"), "{e}");
    let text = DEFAULT_CONFIG.replace(
        "reference_mag_window_mag = [-3.0, 1.0]",
        "reference_mag_window_mag = [1.0, -3.0]",
    );
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("reference_mag_window_mag"), "{e}");
}

#[test]
fn axis_names() {
    assert_eq!(FactorAxis::parse("RA").unwrap(), FactorAxis::Ra);
    assert_eq!(FactorAxis::parse("combined").unwrap(), FactorAxis::Combined);
    assert!((FactorAxis::Combined.value(0.6, -0.8) - 1.0).abs() < 1e-12);
    assert_eq!(FactorAxis::Dec.value(0.6, -0.8), 0.8);
    assert!(
        FactorAxis::parse("x")
            .unwrap_err()
            .to_string()
            .contains("ra, dec or combined")
    );
}
