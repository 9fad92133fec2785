//! Weather in the budget: nights lost to clouds and the hours it takes to
//! get the clear ones a plan needs (docs/science.md, Weather and allocation).
//!
//! The model: each night of a month m is clear (usable for the programme)
//! with probability f_m, the site's clear fraction for that month,
//! independently of other nights. A planned night that is lost is observed
//! again on a later night of the same kind, whole (its visits and its
//! calibrations together), until a clear one comes. The number of nights
//! scheduled for k clear nights of month m is then k + X with X negative
//! binomial (k successes, success probability f_m): mean k / f_m, so the
//! expected hours scale as 1/f. The pessimistic figure is a quantile q of the
//! scheduled hours Σ_m h̄_m (k_m + X_m), h̄_m the mean hours of month m's
//! nights, computed by convolving the months' distributions.

/// Clear fraction of a site without climatology, every month: a typical
/// good mountain site (docs/science.md, Weather and allocation; CTIO's
/// 1965–1989 statistics give 0.6–0.9 of the night usable by month).
pub const DEFAULT_CLEAR_FRACTION: f64 = 0.7;

/// The pessimistic quantile used unless another is asked (common practice
/// for a plan that should hold nine times in ten).
pub const DEFAULT_CONFIDENCE: f64 = 0.9;

/// Probability mass neglected in the tail of each month's distribution.
const TAIL: f64 = 1e-12;

/// One planned night's load: its month (1–12) and its hours in clear weather
/// (visits and calibrations).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NightLoad {
    /// Calendar month of the night (1–12), local date of its evening.
    pub month: u32,
    /// Hours the night's plan takes when it is clear.
    pub hours: f64,
}

fn f_of(clear: &[f64; 12], month: u32) -> f64 {
    clear[(month.clamp(1, 12) - 1) as usize]
}

/// Expected scheduled hours for the nights' plans: Σ h_n / f_m(n).
pub fn expected_hours(nights: &[NightLoad], clear: &[f64; 12]) -> f64 {
    nights
        .iter()
        .map(|n| n.hours / f_of(clear, n.month))
        .sum::<f64>()
        + 0.0
}

/// Nights scheduled to get `k` clear ones at clear fraction `f`: the
/// probabilities of k, k + 1, … (negative binomial, failures before the
/// k-th success), until the tail left is below 10⁻¹².
fn nights_pmf(k: u32, f: f64) -> Vec<f64> {
    if k == 0 || f >= 1.0 {
        return vec![1.0];
    }
    let q = 1.0 - f;
    // P(X = 0) = f^k; P(X = x + 1) = P(X = x) (k + x) / (x + 1) q.
    let mut p = (k as f64 * f.ln()).exp();
    let mut out = vec![p];
    let mut acc = p;
    let mut x = 0.0;
    while 1.0 - acc > TAIL && out.len() < 200_000 {
        p *= (k as f64 + x) / (x + 1.0) * q;
        x += 1.0;
        out.push(p);
        acc += p;
    }
    out
}

/// The q-quantile of the number of nights scheduled for `k` clear nights at
/// clear fraction `f` (k plus the negative binomial's quantile).
pub fn nights_quantile(k: u32, f: f64, q: f64) -> u32 {
    let pmf = nights_pmf(k, f);
    let mut acc = 0.0;
    for (x, p) in pmf.iter().enumerate() {
        acc += p;
        if acc >= q - 1e-12 {
            return k + x as u32;
        }
    }
    k + pmf.len() as u32 - 1
}

/// The distribution of the scheduled hours for the nights' plans (see the
/// module documentation): the clear-weather hours plus the weather's extra
/// hours on a grid. Months are grouped with their mean night; with one month
/// the grid is that night's hours and the distribution is exact, with more
/// the months are convolved on a grid of 1/1000 of the weather's mean extra
/// hours, so quantiles are good to about that.
#[derive(Debug, Clone, PartialEq)]
pub struct HoursDistribution {
    /// Hours when every night is clear.
    pub clear_hours: f64,
    /// Grid step of the extra hours.
    step: f64,
    /// Probability of clear_hours + i · step.
    mass: Vec<f64>,
}

impl HoursDistribution {
    /// The distribution for the nights' plans at the site's clear fractions.
    pub fn new(nights: &[NightLoad], clear: &[f64; 12]) -> Self {
        let mut groups = [(0u32, 0.0f64); 12];
        for n in nights {
            let g = &mut groups[(n.month.clamp(1, 12) - 1) as usize];
            g.0 += 1;
            g.1 += n.hours;
        }
        let clear_hours: f64 = groups.iter().map(|g| g.1).sum::<f64>() + 0.0;
        let live: Vec<(u32, f64, f64)> = groups
            .iter()
            .enumerate()
            .filter(|(m, g)| g.0 > 0 && g.1 > 0.0 && f_of(clear, *m as u32 + 1) < 1.0)
            .map(|(m, g)| (g.0, g.1 / g.0 as f64, f_of(clear, m as u32 + 1)))
            .collect();
        let step = match live[..] {
            [] => 1.0,
            [(_, h, _)] => h,
            _ => {
                let extra_mean: f64 = live
                    .iter()
                    .map(|(k, h, f)| *k as f64 * h * (1.0 - f) / f)
                    .sum();
                (extra_mean / 1000.0).max(1e-9)
            }
        };
        let mut mass = vec![1.0f64];
        for (k, h, f) in live {
            let pmf = nights_pmf(k, f);
            let cell = h / step;
            let span = ((pmf.len() - 1) as f64 * cell).round() as usize;
            let mut next = vec![0.0; mass.len() + span];
            for (x, p) in pmf.iter().enumerate() {
                if *p < TAIL * 1e-3 {
                    continue;
                }
                let off = (x as f64 * cell).round() as usize;
                // Each cell gains d·p once per term, in the terms' order (a
                // loop over slices, without an index check per cell).
                for (n, d) in next[off..off + mass.len()].iter_mut().zip(&mass) {
                    *n += d * p;
                }
            }
            // Drop the far tail.
            let total: f64 = next.iter().sum();
            let mut acc = 0.0;
            for (i, v) in next.iter().enumerate() {
                acc += v;
                if total - acc < TAIL {
                    next.truncate(i + 1);
                    break;
                }
            }
            mass = next;
        }
        HoursDistribution {
            clear_hours,
            step,
            mass,
        }
    }

    /// The q-quantile of the scheduled hours: the least hours whose
    /// cumulative probability reaches q.
    pub fn quantile(&self, q: f64) -> f64 {
        let mut acc = 0.0;
        for (i, d) in self.mass.iter().enumerate() {
            acc += d;
            if acc >= q - 1e-12 {
                return self.clear_hours + i as f64 * self.step;
            }
        }
        self.clear_hours + (self.mass.len() - 1) as f64 * self.step
    }

    /// The probability that the plans fit within `hours` scheduled hours.
    pub fn probability_within(&self, hours: f64) -> f64 {
        let mut acc = 0.0;
        for (i, d) in self.mass.iter().enumerate() {
            if self.clear_hours + i as f64 * self.step > hours + 1e-9 {
                break;
            }
            acc += d;
        }
        acc.min(1.0)
    }
}

/// The q-quantile of the scheduled hours for the nights' plans
/// ([`HoursDistribution`]).
pub fn quantile_hours(nights: &[NightLoad], clear: &[f64; 12], q: f64) -> f64 {
    HoursDistribution::new(nights, clear).quantile(q)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clear_sky_changes_nothing() {
        let n = [
            NightLoad {
                month: 3,
                hours: 1.5,
            },
            NightLoad {
                month: 9,
                hours: 0.5,
            },
        ];
        let c = [1.0; 12];
        assert_eq!(expected_hours(&n, &c), 2.0);
        assert_eq!(quantile_hours(&n, &c, 0.9), 2.0);
    }

    #[test]
    fn negative_binomial_mean() {
        // Σ x pmf(x) = k (1 − f) / f, the negative binomial's mean (a
        // textbook identity).
        let (k, f) = (7u32, 0.6);
        let m: f64 = nights_pmf(k, f)
            .iter()
            .enumerate()
            .map(|(x, p)| x as f64 * p)
            .sum();
        assert!((m - k as f64 * 0.4 / 0.6).abs() < 1e-9, "{m}");
    }
}
