//! The parallax configuration (config/parallax.toml): the built-in defaults
//! load, and a bad file is refused naming the file, line and key.

use rung::ladder::parallax::{DEFAULT_CONFIG, FactorAxis, ParallaxConfig};
use std::path::Path;

#[test]
fn builtin_defaults_load() {
    let c = ParallaxConfig::builtin().unwrap();
    // Common practice (SCIENCE.md): epochs within ±1 h of the meridian, a floor of a few mas.
    assert_eq!(c.ha_limit_h, 1.0);
    assert!((1.0..=5.0).contains(&c.floor_mas));
    assert_eq!(c.factor_axis, FactorAxis::Ra);
    assert!(c.epochs_per_season <= c.max_epochs_per_season);
}

#[test]
fn bad_values_name_file_line_and_key() {
    let f = Path::new("my-parallax.toml");
    let text = DEFAULT_CONFIG.replace("floor_mas = 3.0", "floor_mas = -1.0");
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

    let text = DEFAULT_CONFIG.replace("factor_axis = \"ra\"", "factor_axis = \"sideways\"");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("my-parallax.toml") && e.contains("line"), "{e}");

    let text = format!("{DEFAULT_CONFIG}\nfloor_mass = 2.0\n");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("floor_mass"), "{e}");

    let text = DEFAULT_CONFIG.replace("max_epochs_per_season = 8", "max_epochs_per_season = 1");
    let e = ParallaxConfig::from_toml(&text, f).unwrap_err().to_string();
    assert!(e.contains("max_epochs_per_season"), "{e}");

    let text = DEFAULT_CONFIG.replace("factor_fraction = 0.8", "factor_fraction = 1.2");
    assert!(ParallaxConfig::from_toml(&text, f).is_err());
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
