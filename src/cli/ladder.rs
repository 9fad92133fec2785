//! `rung ladder`: the distance ladder of a programme — the chain from the
//! anchors' parallaxes through the host fields to the supernovae, an end
//! point's error budget by rung and term, every distance's own and shared σ,
//! and what the next hour on each rung buys (`rung::ladder::chain`).

use super::outln;
use anyhow::Result;
use rung::ladder::chain::{EndPoint, LadderReport, report};
use std::path::PathBuf;

/// Arguments of `rung ladder`.
#[derive(clap::Args)]
pub struct Args {
    /// Targets file (CSV or TOML); default the demo programme
    #[arg(long)]
    pub targets: Option<PathBuf>,
    /// What to budget: h0 (the Hubble-flow intercept), a field or node name, or a supernova's name (default: h0 when the chain reaches the Hubble flow, else the first calibrator's host)
    #[arg(long = "end-point")]
    pub end_point: Option<String>,
    /// How many of the best next steps to list
    #[arg(long, default_value_t = 8)]
    pub steps: usize,
    #[command(flatten)]
    pub site: super::args::SiteArg,
    #[command(flatten)]
    pub range: super::args::RangeArgs,
    #[command(flatten)]
    pub goal: super::args::GoalArg,
    #[command(flatten)]
    pub instrument: super::args::InstrumentArg,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// JSON output
    #[arg(long)]
    pub json: bool,
}

/// The end point named on the command line: `h0`, else a supernova of the
/// programme, else a node.
pub fn end_point(name: &str, targets: &[rung::io::targets::Target]) -> EndPoint {
    if name.eq_ignore_ascii_case("h0") {
        return EndPoint::Hubble;
    }
    match targets.iter().find(|t| t.name == name) {
        Some(t) if t.kind == rung::io::targets::Kind::Transient => EndPoint::Supernova {
            target: name.to_string(),
        },
        _ => EndPoint::Node {
            node: name.to_string(),
        },
    }
}

/// Run `rung ladder`.
pub fn run(a: Args) -> Result<()> {
    let file = a.targets.clone().unwrap_or_else(super::demo_programme);
    let st = super::settings(
        super::args::choices(
            Some(&a.site),
            Some(&a.instrument),
            Some(&a.limits),
            Some(&a.range),
            Some(&a.goal),
        ),
        Some(&file),
        &[],
    )?;
    let targets = super::load_targets(&file)?;
    let ep = a.end_point.as_deref().map(|n| end_point(n, &targets));
    let r = report(&st, &targets, Some(&file), ep)?;
    if a.json {
        let mut v = serde_json::to_value(&r)?;
        if let Some(o) = v.as_object_mut() {
            o.insert("settings".into(), st.to_json());
        }
        return super::print_json(&v);
    }
    print_text(&r, &st, a.steps);
    Ok(())
}

fn pct(x: f64) -> String {
    rung::output::fixed(x, 2).map_or("–".into(), |v| format!("{v} %"))
}

/// The report as text.
fn print_text(r: &LadderReport, st: &rung::programme::Settings, steps: usize) {
    outln!(
        "Distance ladder {} to {} at {} with {}",
        st.from,
        st.to,
        st.site.name,
        st.instrument().name
    );
    outln!();
    outln!(
        "Chain (node: modulus ± σ on the zero point the programme's anchors fix, own | shared, σd/d):"
    );
    for n in r.chain_in_order() {
        outln!(
            "  {:<11} {:<22} μ {:>7.3} ± {:.3}  own {:>6} | shared {:>6}  {}",
            n.section.text(),
            n.name,
            n.modulus_mag,
            n.sigma_mag,
            pct(n.own_pct),
            pct(n.shared_pct),
            pct(n.distance_pct)
        );
    }
    if !r.pulsators.is_empty() {
        let s = rung::ladder::chain::Section::Pulsators;
        outln!("  ({}: {})", s.text(), s.meaning());
    }
    if let (Some(h), Some(p)) = (r.h0_km_s_mpc, r.h0_sigma_pct) {
        outln!(
            "  H0 {:.2} ± {:.2} km/s/Mpc ({}; {})",
            h,
            h * p / 100.0,
            pct(p),
            r.h0_basis
        );
    }
    for o in &r.open {
        outln!("  open: {}", o.why);
    }
    if !r.calibrators.is_empty() {
        outln!();
        outln!("Calibrators (host μ ± σ; the peak absolute magnitude each calibrates):");
        for c in &r.calibrators {
            outln!(
                "  {:<12} in {:<10} μ {:.3} ± {:.3}  M_B {:.3} ± {:.3} (host {:.3}, own {:.3})",
                c.target,
                c.host,
                c.host_mu_mag,
                c.host_mu_err_mag,
                c.peak_abs_mag,
                c.sigma_mag,
                c.sigma_host_mag,
                c.sigma_own_mag
            );
            outln!("    M_B {}", c.peak_abs_mag_how);
        }
    }
    outln!();
    let b = &r.end_point;
    outln!(
        "End point: {}  σ {:.4} mag = {} (own {} | shared {})",
        r.end_point_text,
        b.sigma_mag,
        pct(b.distance_pct),
        pct(100.0 * rung::ladder::DIST_FRAC_PER_MAG * b.own_sigma_mag),
        pct(100.0 * rung::ladder::DIST_FRAC_PER_MAG * b.shared_sigma_mag)
    );
    outln!("  by rung:");
    for s in &b.by_rung {
        outln!(
            "    {:<16} {:>7}  {:>5.1} % of the variance",
            s.rung.text(),
            pct(s.distance_pct),
            100.0 * s.variance_fraction
        );
    }
    outln!("  by term:");
    for s in b.by_term.iter().filter(|s| s.variance_fraction >= 0.005) {
        outln!(
            "    {:<16} {:<28} {:>7}  {:>5.1} %",
            s.rung.text(),
            s.term,
            pct(s.distance_pct),
            100.0 * s.variance_fraction
        );
    }
    outln!();
    outln!("Hours planned by rung:");
    for h in &r.hours_by_rung {
        outln!("  {:<16} {:>7.1} h", h.rung.text(), h.hours);
    }
    if r.pulsator_hours > 0.0 {
        outln!("  {:<16} {:>7.1} h", "pulsators", r.pulsator_hours);
    }
    outln!();
    outln!("Best next hour (fall of the end point's σd/d per telescope hour):");
    for s in r.next.iter().take(steps) {
        outln!(
            "  {:>8} %/h  {:<16} {} ({} h: {} → {})",
            rung::output::small_gain(s.gain_pct_per_hour, 3),
            s.step.rung.text(),
            s.step.label,
            rung::output::num(s.step.hours, if s.step.hours < 0.1 { 2 } else { 1 }),
            pct(s.before_pct),
            pct(s.after_pct)
        );
    }
    if r.next.is_empty() {
        outln!("  (no step helps the end point)");
    }
    if r.next.iter().take(steps).any(|s| {
        s.step.rung == rung::ladder::chain::Rung::Calibrator && s.step.label.starts_with("a new")
    }) {
        outln!(
            "  (a new calibrator needs a supernova to go off in a host field: its hours are the chase's, its timing is not the observer's to choose)"
        );
    }
    outln!();
    outln!("One more visit of each target (its method's; fall of the end point's σd/d per hour):");
    // The stars of a field, one line per field: its visits serve them all.
    let field_star = |m: &rung::ladder::chain::report::Marginal| {
        m.why
            .as_deref()
            .is_some_and(|w| w.starts_with("a star of a field"))
    };
    let mut said: Vec<&str> = Vec::new();
    for m in &r.marginal {
        if field_star(m) {
            let node = m.node.as_deref().unwrap_or("");
            if !said.contains(&node) {
                said.push(node);
                let n = r
                    .marginal
                    .iter()
                    .filter(|x| field_star(x) && x.node.as_deref() == Some(node))
                    .count();
                outln!(
                    "  {:>8}      {:<16} {n} stars of field {node}: the field's visits serve them all (see one more visit of field {node})",
                    "–",
                    m.role.text(),
                );
            }
            continue;
        }
        match (&m.step, m.hours, m.gain_pct_per_hour) {
            (Some(step), Some(h), Some(g)) => outln!(
                "  {:>8} %/h  {:<16} {} ({} h)",
                rung::output::small_gain(g, 3),
                r.role_text(m),
                step,
                rung::output::num(h, if h < 0.1 { 2 } else { 1 })
            ),
            _ => outln!(
                "  {:>8}      {:<16} {}: {}",
                "–",
                r.role_text(m),
                m.target,
                m.why.as_deref().unwrap_or("")
            ),
        }
    }
    for n in &r.notes {
        outln!("note: {n}");
    }
    for (t, why) in &r.left_out {
        outln!("left out: {t}: {why}");
    }
}
