//! `rung budget`: what each distance goal costs with the site's weather and
//! the instrument's overheads, and, given the hours asked, which goals they
//! meet.

use anyhow::Result;
use rung::plan::budget::{self, Asked, Budget, Options};
use std::path::PathBuf;

/// Arguments of `rung budget`.
#[derive(clap::Args)]
pub struct Args {
    #[command(flatten)]
    pub site: super::args::SiteArg,
    /// Targets file (CSV or TOML).
    #[arg(long)]
    pub targets: PathBuf,
    #[command(flatten)]
    pub range: super::args::RangeArgs,
    #[command(flatten)]
    pub goal: super::args::GoalArg,
    #[command(flatten)]
    pub instrument: super::args::InstrumentArg,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    /// Telescope hours asked over the range (scheduled hours; the weather takes its share): which goals they meet
    #[arg(long, allow_hyphen_values = true)]
    pub hours: Option<f64>,
    /// Hours asked per semester: H for every semester of the range, or LABEL=H,LABEL=H (e.g. 2027A=20,2027B=15)
    #[arg(long, allow_hyphen_values = true)]
    pub hours_per_semester: Option<String>,
    /// Whole nights asked, each worth the range's mean dark time (Sun below --sun-alt)
    #[arg(long, allow_hyphen_values = true)]
    pub nights: Option<f64>,
    /// Quantile of the pessimistic hours with the weather, 0.5..0.999 (default 0.9)
    #[arg(long, allow_hyphen_values = true)]
    pub confidence: Option<f64>,
    /// Budget the same programme on these instruments side by side (comma-separated catalogue names)
    #[arg(long, value_delimiter = ',')]
    pub instruments: Vec<String>,
    /// Budget the same programme at these sites side by side (comma-separated catalogue names)
    #[arg(long, value_delimiter = ',')]
    pub sites: Vec<String>,
    /// Write the proposal figure (σd/d against hours for every target, goals met against hours) to this file: SVG for FILE.svg, PNG for FILE.png
    #[arg(long)]
    pub figure: Option<PathBuf>,
    /// A LaTeX table ready for a proposal (needs booktabs).
    #[arg(long)]
    pub latex: bool,
    /// A technical-justification paragraph written from the numbers.
    #[arg(long)]
    pub justification: bool,
    /// Every target's σd/d-against-hours curve (clear and expected hours, the marginal gain of each point) and the hours at which each further goal falls in, after the table
    #[arg(long)]
    pub curves: bool,
    /// JSON output (with every target's σd/d-against-hours curve and the justification).
    #[arg(long)]
    pub json: bool,
    /// CSV output.
    #[arg(long)]
    pub csv: bool,
    /// A Markdown table ready for a proposal.
    #[arg(long)]
    pub markdown: bool,
}

/// The hours asked on the command line, if any.
fn asked(a: &Args) -> Result<Option<Asked>> {
    let per = match &a.hours_per_semester {
        Some(t) => Asked::parse_per_semester(t)?,
        None => Default::default(),
    };
    let x = Asked {
        hours: a.hours,
        hours_per_semester: per,
        nights: a.nights,
    };
    if x == Asked::default() {
        return Ok(None);
    }
    x.check()?;
    Ok(Some(x))
}

/// Run `rung budget`.
pub fn run(a: Args) -> Result<()> {
    if let Some(path) = &a.figure {
        figure_format(path)?;
    }
    let asked = asked(&a)?;
    if let Some(q) = a.confidence
        && !(q.is_finite() && (0.5..=0.999).contains(&q))
    {
        anyhow::bail!(rung::RungError::invalid(
            "--confidence",
            format!("{q} is not a quantile within 0.5..0.999"),
        ));
    }
    let st = super::settings(
        super::args::choices(
            Some(&a.site),
            Some(&a.instrument),
            Some(&a.limits),
            Some(&a.range),
            Some(&a.goal),
        ),
        Some(&a.targets),
        &[],
    )?;
    let targets = super::load_targets(&a.targets)?;
    // Side by side: every site asked × every instrument asked.
    let mut list = Vec::new();
    let sites: Vec<Option<&String>> = if a.sites.is_empty() {
        vec![None]
    } else {
        a.sites.iter().map(Some).collect()
    };
    let instruments: Vec<Option<&String>> = if a.instruments.is_empty() {
        vec![None]
    } else {
        a.instruments.iter().map(Some).collect()
    };
    for site in &sites {
        let at = match site {
            Some(spec) => st.with_site(
                rung::io::sites::resolve(spec)
                    .map_err(|e| anyhow::anyhow!("--sites {spec}: {e}"))?,
            ),
            None => st.clone(),
        };
        for ins in &instruments {
            list.push(match ins {
                Some(name) => at
                    .with_instrument(name)
                    .map_err(|e| anyhow::anyhow!("--instruments {name}: {e}"))?,
                None => at.clone(),
            });
        }
    }
    let opts = Options {
        curves: a.json || a.figure.is_some() || a.curves,
        asked,
        confidence: a.confidence,
    };
    let budgets = budget::compare::side_by_side(&list, &targets, &opts)?;
    let b = &budgets[0];
    if let Some(path) = &a.figure {
        let bytes = match figure_format(path)? {
            Figure::Svg => budget::figure::svg(b).into_bytes(),
            Figure::Png => budget::figure::png(b)?,
        };
        rung::io::atomic::write_atomic(path, &bytes)?;
        eprintln!(
            "rung: figure written to {}",
            super::full_path(path).display()
        );
    }
    let sides: Vec<budget::compare::Side> = budgets.iter().map(budget::compare::Side::of).collect();
    if a.json {
        let mut v = serde_json::to_value(b)?;
        if let Some(o) = v.as_object_mut() {
            o.insert("settings".into(), st.to_json());
            o.insert(
                "justification".into(),
                budget::proposal::justification(b).into(),
            );
            if budgets.len() > 1 {
                o.insert("side_by_side".into(), serde_json::to_value(&sides)?);
            }
        }
        super::print_json(&v)?;
    } else if a.csv {
        print!("{}", budget::csv(b));
    } else if a.markdown {
        print!("{}", budget::markdown(b));
    } else if a.latex {
        print!("{}", budget::proposal::latex(b));
    } else if a.justification {
        println!("{}", budget::proposal::justification(b));
    } else if budgets.len() > 1 {
        super::outln!(
            "Side by side {} to {} (window above {:.0}°, Sun below {:.0}°){}",
            st.from,
            st.to,
            st.limits.min_alt_deg,
            st.limits.sun_alt_deg,
            b.allocation
                .as_ref()
                .map(|x| format!(", {} asked", budget::asked_words(x)))
                .unwrap_or_default()
        );
        for l in budget::compare::side_lines(&sides) {
            super::outln!("{l}");
        }
    } else {
        print_text(&st, b);
    }
    if a.curves && !(a.json || a.csv || a.markdown || a.latex || a.justification) {
        super::outln!();
        for l in budget::curve_lines(b) {
            super::outln!("{l}");
        }
    }
    Ok(())
}

fn print_text(st: &rung::programme::Settings, b: &Budget) {
    use rung::output::num;
    super::outln!(
        "Distance budget {} to {} at {} with {} (window above {:.0}°, Sun below {:.0}°)",
        st.from,
        st.to,
        st.site.name,
        st.instrument().name,
        st.limits.min_alt_deg,
        st.limits.sun_alt_deg
    );
    for l in budget::assumptions(b) {
        super::outln!("  {l}");
    }
    super::outln!(
        "  {:<14} {:<9} {:>6} {:>8} {:>6} {:>8} {:>7} {:>7} {:>7}  verdict",
        "target",
        "method",
        "goal %",
        "reach %",
        "epochs",
        "exp/ep s",
        "hours",
        "exp h",
        format!("{}% h", num(b.weather.confidence * 100.0, 0))
    );
    for r in &b.rows {
        super::outln!(
            "  {:<14} {:<9} {:>6} {:>8} {:>6} {:>8} {:>7} {:>7} {:>7}  {}",
            r.target,
            r.kind.as_str(),
            num(r.goal_pct, 1),
            super::opt(Some(r.achievable_pct).filter(|x| x.is_finite()), 2),
            r.epochs,
            num(r.exptime_per_epoch_s, 0),
            num(r.hours, 1),
            num(r.hours_expected, 1),
            num(r.hours_pessimistic, 1),
            r.verdict.text()
        );
    }
    let terms = budget::terms_lines(b);
    if !terms.is_empty() {
        super::outln!("  σd/d by term (percent, in quadrature):");
        for l in terms {
            super::outln!("    {l}");
        }
    }
    for l in budget::totals_lines(b) {
        super::outln!("  {l}");
    }
    for o in &b.observed {
        super::outln!("  {}", o.text);
    }
    for (name, why) in &b.skipped {
        super::outln!("  skipped {name}: {why}");
    }
    if let Some(a) = &b.allocation {
        super::outln!();
        for l in budget::allocation_lines(b, a) {
            super::outln!("{l}");
        }
    }
}

/// The figure's format, from its file name.
enum Figure {
    Svg,
    Png,
}

/// `--figure FILE`: SVG for a name ending in `.svg`, PNG for `.png` (any
/// case); any other name is refused before anything is computed.
fn figure_format(path: &std::path::Path) -> anyhow::Result<Figure> {
    match path
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase())
        .as_deref()
    {
        Some("svg") => Ok(Figure::Svg),
        Some("png") => Ok(Figure::Png),
        _ => anyhow::bail!(
            "--figure {}: give a file name ending in .svg or .png (the format follows the name)",
            path.display()
        ),
    }
}
