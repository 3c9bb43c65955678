//! Statistics of a restricted fit: the tests of the restrictions (F, Wald, likelihood
//! ratio, score) and the distribution functions they need (F, Student t, χ²).

/// The tests of the restrictions `Cβ = d` against the unrestricted fit, with
/// `r = rank C`, `df2 = p − n` and `p` observations:
///
/// * F: `((RSS_R − RSS_U)/r) / (RSS_U/df2)`, exact F(r, df2) under Gaussian errors and true
///   restrictions;
/// * Wald `p·(RSS_R − RSS_U)/RSS_U`, likelihood ratio `p·ln(RSS_R/RSS_U)` and score
///   (Lagrange multiplier) `p·(RSS_R − RSS_U)/RSS_R`: the three large-sample tests of the
///   Gaussian linear model with the variance estimated under each hypothesis, each
///   asymptotically χ²(r); always `Wald ≥ LR ≥ score` (Breusch 1979; Buse 1982, *The
///   American Statistician* 36).
#[derive(Copy, Clone, Debug, PartialEq)]
pub struct RestrictionTest {
    /// The F-statistic (`+∞` when the unrestricted fit is exact but the restricted one is not).
    pub statistic: f64,
    /// Numerator degrees of freedom (rank of `C`).
    pub df1: usize,
    /// Denominator degrees of freedom (`p − n`).
    pub df2: usize,
    /// Weighted RSS of the unrestricted fit.
    pub rss_unrestricted: f64,
    /// `RSS_R − RSS_U`, computed as the squared norm of a projection (no cancellation).
    pub rss_increase: f64,
    /// Upper-tail probability `P(F(df1, df2) ≥ statistic)`.
    pub p_value: f64,
    /// Wald statistic `p·(RSS_R − RSS_U)/RSS_U`.
    pub wald: f64,
    /// `P(χ²(df1) ≥ wald)`.
    pub wald_p_value: f64,
    /// Likelihood-ratio statistic `p·ln(RSS_R/RSS_U)`.
    pub likelihood_ratio: f64,
    /// `P(χ²(df1) ≥ likelihood_ratio)`.
    pub likelihood_ratio_p_value: f64,
    /// Score (Lagrange-multiplier) statistic `p·(RSS_R − RSS_U)/RSS_R`.
    pub score: f64,
    /// `P(χ²(df1) ≥ score)`.
    pub score_p_value: f64,
}

/// Builds the tests from the restricted RSS, the increase `RSS_R − RSS_U` and the number
/// of observations `p`.
pub(crate) fn f_test(rss_restricted: f64, rss_increase: f64, df1: usize, df2: usize, p: usize) -> RestrictionTest {
    let rss_u = (rss_restricted - rss_increase).max(0.0);
    let statistic = if rss_increase == 0.0 {
        0.0
    } else if rss_u == 0.0 {
        f64::INFINITY
    } else {
        (rss_increase / df1 as f64) / (rss_u / df2 as f64)
    };
    let pf = p as f64;
    let wald = if rss_increase == 0.0 {
        0.0
    } else {
        pf * rss_increase / rss_u
    };
    // ln(RSS_R/RSS_U) = ln1p(increase/RSS_U): no cancellation for a small increase.
    let likelihood_ratio = if rss_increase == 0.0 {
        0.0
    } else {
        pf * (rss_increase / rss_u).ln_1p()
    };
    let score = if rss_restricted > 0.0 {
        pf * rss_increase / rss_restricted
    } else {
        0.0
    };
    let k = df1 as f64;
    RestrictionTest {
        statistic,
        df1,
        df2,
        rss_unrestricted: rss_u,
        rss_increase,
        p_value: f_upper_tail(statistic, k, df2 as f64),
        wald,
        wald_p_value: chi2_upper_tail(wald, k),
        likelihood_ratio,
        likelihood_ratio_p_value: chi2_upper_tail(likelihood_ratio, k),
        score,
        score_p_value: chi2_upper_tail(score, k),
    }
}

/// Two-sided tail of Student's t with `nu` degrees of freedom:
/// `P(|T| ≥ |t|) = I_{ν/(ν+t²)}(ν/2, 1/2)`.
///
/// ```
/// // scipy.stats: 2·t.sf(2.0, 10) = 0.07338803477074037
/// let p = tangency::lsq::stats::t_two_sided(2.0, 10.0);
/// assert!((p - 0.07338803477074037).abs() < 1e-13);
/// ```
pub fn t_two_sided(t: f64, nu: f64) -> f64 {
    if t.is_nan() || nu.is_nan() || nu <= 0.0 {
        return f64::NAN;
    }
    if t.is_infinite() {
        return 0.0;
    }
    let t2 = t * t;
    // For |t| small against √ν, x = ν/(ν + t²) is close to 1: use 1 − x = t²/(ν + t²) directly.
    reg_inc_beta_pair(nu / 2.0, 0.5, nu / (nu + t2), t2 / (nu + t2))
}

/// The quantile `t_q` of Student's t with `nu` degrees of freedom (`P(T ≤ t_q) = q`,
/// `0 < q < 1`), by bisection on [`t_two_sided`] to full precision (monotone, so it
/// cannot fail to converge).
///
/// ```
/// // scipy.stats: t.ppf(0.975, 9) = 2.262157162798205
/// let t = tangency::lsq::stats::t_quantile(0.975, 9.0);
/// assert!((t - 2.262157162798205).abs() < 1e-12);
/// ```
pub fn t_quantile(q: f64, nu: f64) -> f64 {
    if !(q > 0.0 && q < 1.0) || nu.is_nan() || nu <= 0.0 {
        return f64::NAN;
    }
    if q == 0.5 {
        return 0.0;
    }
    // Two-sided tail of the wanted |t|.
    let tail = 2.0 * q.min(1.0 - q);
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    while t_two_sided(hi, nu) > tail {
        hi *= 2.0;
        if hi > 1e300 {
            break;
        }
    }
    for _ in 0..2000 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if t_two_sided(mid, nu) > tail {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let t = 0.5 * (lo + hi);
    if q > 0.5 {
        t
    } else {
        -t
    }
}

/// Upper tail of the χ² distribution with `k` degrees of freedom,
/// `P(χ²(k) ≥ x) = Q(k/2, x/2)` (regularized upper incomplete gamma).
///
/// ```
/// // scipy.stats: chi2.sf(10.0, 5) = 0.07523524614651217
/// let p = tangency::lsq::stats::chi2_upper_tail(10.0, 5.0);
/// assert!((p - 0.07523524614651217).abs() < 1e-14);
/// ```
pub fn chi2_upper_tail(x: f64, k: f64) -> f64 {
    if x.is_nan() || k.is_nan() || k <= 0.0 {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 1.0;
    }
    if x.is_infinite() {
        return 0.0;
    }
    gamma_q(k / 2.0, x / 2.0)
}

/// Regularized upper incomplete gamma `Q(a, x)`: the series for `P` when `x < a + 1`, the
/// continued fraction (modified Lentz) for `Q` otherwise (Press, Teukolsky, Vetterling &
/// Flannery, *Numerical Recipes*, 3rd ed., §6.2). Written by hand: no dependency of the
/// crate offers it.
fn gamma_q(a: f64, x: f64) -> f64 {
    let ln_front = a * x.ln() - x - ln_gamma(a);
    if x < a + 1.0 {
        let (mut ap, mut sum) = (a, 1.0 / a);
        let mut del = sum;
        for _ in 0..100_000 {
            ap += 1.0;
            del *= x / ap;
            sum += del;
            if del.abs() < sum.abs() * 1e-17 {
                break;
            }
        }
        1.0 - sum * ln_front.exp()
    } else {
        const TINY: f64 = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / TINY;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..100_000 {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < TINY {
                d = TINY;
            }
            c = b + an / c;
            if c.abs() < TINY {
                c = TINY;
            }
            d = 1.0 / d;
            let del = d * c;
            h *= del;
            if (del - 1.0).abs() < 1e-16 {
                break;
            }
        }
        ln_front.exp() * h
    }
}

/// `P(F(d1, d2) ≥ x) = I_{d2/(d2 + d1·x)}(d2/2, d1/2)` (regularized incomplete beta).
pub fn f_upper_tail(x: f64, d1: f64, d2: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 1.0;
    }
    if x.is_infinite() {
        return 0.0;
    }
    reg_inc_beta(d2 / 2.0, d1 / 2.0, d2 / (d2 + d1 * x))
}

/// Regularized incomplete beta `I_x(a, b)` by the continued fraction evaluated with the
/// modified Lentz method (Press, Teukolsky, Vetterling & Flannery, *Numerical Recipes*,
/// 3rd ed., §6.4). Written by hand: no dependency offers it.
fn reg_inc_beta(a: f64, b: f64, x: f64) -> f64 {
    reg_inc_beta_pair(a, b, x, 1.0 - x)
}

/// `I_x(a, b)` with `y = 1 − x` given separately (accurate when `x` is close to 1).
fn reg_inc_beta_pair(a: f64, b: f64, x: f64, y: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    if y <= 0.0 {
        return 1.0;
    }
    let ln_front = ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b) + a * x.ln() + b * y.ln();
    if x < (a + 1.0) / (a + b + 2.0) {
        ln_front.exp() * beta_cf(a, b, x) / a
    } else {
        1.0 - ln_front.exp() * beta_cf(b, a, y) / b
    }
}

fn beta_cf(a: f64, b: f64, x: f64) -> f64 {
    const TINY: f64 = 1e-300;
    let (qab, qap, qam) = (a + b, a + 1.0, a - 1.0);
    let mut c = 1.0;
    let mut d = 1.0 - qab * x / qap;
    if d.abs() < TINY {
        d = TINY;
    }
    d = 1.0 / d;
    let mut h = d;
    for m in 1..10_000 {
        let m = m as f64;
        let m2 = 2.0 * m;
        let aa = m * (b - m) * x / ((qam + m2) * (a + m2));
        d = 1.0 + aa * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + aa / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        h *= d * c;
        let aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2));
        d = 1.0 + aa * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = 1.0 + aa / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        let del = d * c;
        h *= del;
        if (del - 1.0).abs() < 1e-15 {
            break;
        }
    }
    h
}

/// `ln Γ(x)` for `x > 0` (Lanczos approximation, g = 7, n = 9 coefficients; common
/// practice, accurate to about 1e-15 relative).
fn ln_gamma(x: f64) -> f64 {
    const G: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        // Reflection: Γ(x)Γ(1 − x) = π / sin(πx).
        return (std::f64::consts::PI / (std::f64::consts::PI * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut a = G[0];
    let t = x + 7.5;
    for (i, g) in G.iter().enumerate().skip(1) {
        a += g / (x + i as f64);
    }
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + a.ln()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn t_chi2_and_quantiles_match_scipy() {
        // Values printed by tests/fixtures/longley_inference.py (scipy.stats 1.17:
        // 2·t.sf, chi2.sf, t.ppf).
        let t_cases = [
            (0.5, 3.0, 0.651447964848151),
            (2.0, 10.0, 0.07338803477074037),
            (4.5, 1.0, 0.1392089745461279),
            (1.96, 1000.0, 0.050273184955748736),
            (10.0, 9.0, 3.578237431924736e-06),
        ];
        for (t, nu, want) in t_cases {
            let got = t_two_sided(t, nu);
            assert!(((got - want) / want).abs() < 1e-12, "t {t} ν {nu}: {got} vs {want}");
        }
        let chi_cases = [
            (0.5, 1.0, 0.47950012218695337),
            (3.0, 2.0, 0.22313016014842982),
            (10.0, 5.0, 0.07523524614651217),
            (100.0, 40.0, 4.791357300338064e-07),
            (1e-3, 3.0, 0.9999915920809419),
        ];
        for (x, k, want) in chi_cases {
            let got = chi2_upper_tail(x, k);
            assert!(((got - want) / want).abs() < 1e-12, "χ² {x} k {k}: {got} vs {want}");
        }
        let q_cases = [
            (0.975, 9.0, 2.262157162798205),
            (0.975, 1.0, 12.706204736174694),
            (0.995, 30.0, 2.7499956535672254),
            (0.9, 4.0, 1.533206274058944),
        ];
        for (q, nu, want) in q_cases {
            let got = t_quantile(q, nu);
            assert!(((got - want) / want).abs() < 1e-12, "q {q} ν {nu}: {got} vs {want}");
            assert!((t_quantile(1.0 - q, nu) + got).abs() < 1e-12);
        }
        assert_eq!(t_two_sided(0.0, 5.0), 1.0);
        assert!(t_quantile(1.0, 5.0).is_nan());
    }

    #[test]
    fn f_tail_matches_closed_forms() {
        // F(2, d2): P(F ≥ x) = (1 + 2x/d2)^(−d2/2) exactly (closed form of the F(2, ν) tail).
        for &(x, d2) in &[(0.5f64, 3.0f64), (2.0, 10.0), (7.3, 25.0)] {
            let exact = (1.0 + 2.0 * x / d2).powf(-d2 / 2.0);
            assert!((f_upper_tail(x, 2.0, d2) - exact).abs() < 1e-12, "{x} {d2}");
        }
        // F(1, 1) is the square of a standard Cauchy variable: P(F ≥ x) = 1 − (2/π)·atan(√x).
        for &x in &[0.1f64, 1.0, 9.0] {
            let exact = 1.0 - 2.0 / std::f64::consts::PI * x.sqrt().atan();
            assert!((f_upper_tail(x, 1.0, 1.0) - exact).abs() < 1e-12, "{x}");
        }
    }
}
