//! Axis ticks: "nice" values on 1-2-5 steps for any range, decade ticks for logarithmic
//! scales, and labels with a true minus sign (U+2212) and a common power-of-ten factor moved
//! into the axis label (×10ⁿ) when the numbers would otherwise be long.
//!
//! Labels are in the figure's text markup (`10^{−3}`), see [`super::text::parse_markup`].

/// One tick: its value in data units and its label (markup).
#[derive(Clone, Debug, PartialEq)]
pub struct Tick {
    /// Position in data units.
    pub value: f64,
    /// Label text (markup), already divided by the common factor.
    pub label: String,
}

/// The ticks of one axis.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct TickSet {
    /// Ticks in increasing order of value.
    pub ticks: Vec<Tick>,
    /// Common factor: labels show value / 10^`exponent`; 0 when no factor is needed.
    pub exponent: i32,
}

impl TickSet {
    /// The text to append to the axis label for the common factor, e.g. `×10^{12}`; empty when
    /// no factor is used.
    pub fn factor_markup(&self) -> String {
        if self.exponent == 0 {
            String::new()
        } else {
            format!("×10^{{{}}}", minus_sign(&self.exponent.to_string()))
        }
    }
}

/// Replace ASCII hyphen-minus by the typographic minus U+2212.
pub fn minus_sign(s: &str) -> String {
    s.replace('-', "\u{2212}")
}

fn pow10(k: i32) -> f64 {
    // Dividing by a positive power is exact for the small powers where it matters
    // (0.1 = 1/10 rounds once instead of accumulating).
    if k >= 0 {
        10f64.powi(k)
    } else {
        1.0 / 10f64.powi(-k)
    }
}

fn scaled(n: i64, k: i32) -> f64 {
    if k >= 0 {
        n as f64 * 10f64.powi(k)
    } else {
        n as f64 / 10f64.powi(-k)
    }
}

/// Nice linear ticks covering [lo, hi] (either order) with at most `max_count` ticks (≥ 2 used).
/// A degenerate range (lo == hi) is widened by 10 % of |lo| (±1 around 0); a non-finite bound
/// gives an empty set.
pub fn linear_ticks(lo: f64, hi: f64, max_count: usize) -> TickSet {
    if !lo.is_finite() || !hi.is_finite() {
        return TickSet::default();
    }
    let (mut a, mut b) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    if b - a <= a.abs().max(b.abs()) * 1e-12 || b == a {
        let d = if a == 0.0 { 1.0 } else { a.abs() * 0.1 };
        a -= d;
        b += d;
    }
    let max_count = max_count.max(2);
    let span = b - a;
    let mut k = (span / max_count as f64).log10().floor() as i32 - 1;
    let (step_m, step_k, first, last) = loop {
        let mut found = None;
        for m in [1i64, 2, 5] {
            let s = m as f64 * pow10(k);
            let first = (a / s - 1e-9).ceil();
            let last = (b / s + 1e-9).floor();
            if last - first + 1.0 <= max_count as f64 {
                found = Some((m, k, first as i64, last as i64));
                break;
            }
        }
        if let Some(f) = found {
            break f;
        }
        k += 1;
    };
    let values: Vec<f64> = (first..=last).map(|i| scaled(i * step_m, step_k)).collect();
    let max_abs = values.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let exponent = if max_abs >= 1e4 || (max_abs > 0.0 && max_abs < 1e-2) {
        max_abs.log10().floor() as i32
    } else {
        0
    };
    let decimals = (exponent - step_k).max(0) as usize;
    let ticks = values
        .into_iter()
        .map(|v| Tick {
            value: v,
            label: format_fixed(v / pow10(exponent), decimals),
        })
        .collect();
    TickSet { ticks, exponent }
}

fn format_fixed(v: f64, decimals: usize) -> String {
    let s = format!("{:.*}", decimals, v);
    // "-0", "-0.0" → "0", "0.0"
    let s = if s
        .trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        s.trim_start_matches('-').to_string()
    } else {
        s
    };
    minus_sign(&s)
}

fn decade_label(k: i32) -> String {
    format!("10^{{{}}}", minus_sign(&k.to_string()))
}

/// Ticks for a logarithmic scale over [lo, hi] (both > 0): one tick per decade, thinned to every
/// 2nd, 5th, 10th… decade when there are more than `max_count`. A range holding fewer than two
/// decade ticks gets ticks at 1, 2, 5 × 10^k (or every integer mantissa) instead. Non-positive
/// or non-finite bounds give an empty set.
pub fn log_ticks(lo: f64, hi: f64, max_count: usize) -> TickSet {
    if !lo.is_finite() || !hi.is_finite() || lo <= 0.0 || hi <= 0.0 {
        return TickSet::default();
    }
    let (a, b) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    let k0 = (a.log10() - 1e-9).ceil() as i32;
    let k1 = (b.log10() + 1e-9).floor() as i32;
    if k1 - k0 + 1 < 2 {
        return log_ticks_within_decades(a, b, max_count);
    }
    let n = (k1 - k0 + 1) as usize;
    let stride = nice_stride(n, max_count.max(2));
    let ticks = (k0..=k1)
        .filter(|k| k.rem_euclid(stride as i32) == 0)
        .map(|k| Tick {
            value: pow10(k),
            label: decade_label(k),
        })
        .collect();
    TickSet { ticks, exponent: 0 }
}

/// Ticks at 1, 2, 5 × 10^k (or every integer mantissa when that gives too few) for a log range
/// spanning less than two decades; falls back to [`linear_ticks`] if fewer than two fit.
fn log_ticks_within_decades(a: f64, b: f64, max_count: usize) -> TickSet {
    let k_lo = a.log10().floor() as i32;
    let k_hi = b.log10().floor() as i32;
    let pick = |mantissas: &[i64]| -> Vec<(i64, i32)> {
        (k_lo..=k_hi)
            .flat_map(|k| mantissas.iter().map(move |&m| (m, k)))
            .filter(|&(m, k)| {
                let v = scaled(m, k);
                v >= a * (1.0 - 1e-12) && v <= b * (1.0 + 1e-12)
            })
            .collect()
    };
    let mut chosen = pick(&[1, 2, 5]);
    if chosen.len() < 3 {
        let all = pick(&[1, 2, 3, 4, 5, 6, 7, 8, 9]);
        if all.len() <= max_count {
            chosen = all;
        }
    }
    if chosen.len() < 2 || chosen.len() > max_count {
        return linear_ticks(a, b, max_count);
    }
    let ticks = chosen
        .into_iter()
        .map(|(m, k)| Tick {
            value: scaled(m, k),
            label: format_fixed(scaled(m, k), (-k).max(0) as usize),
        })
        .collect();
    TickSet { ticks, exponent: 0 }
}

/// Smallest stride from 1, 2, 5, 10, 20, … that leaves at most `max_count` of `n` items.
fn nice_stride(n: usize, max_count: usize) -> usize {
    let mut base = 1usize;
    loop {
        for m in [1usize, 2, 5] {
            let s = m * base;
            if n.div_ceil(s) <= max_count {
                return s;
            }
        }
        base *= 10;
    }
}

/// Ticks for a symmetric-log scale over [lo, hi] with linear region ±`linear_threshold`:
/// zero (when inside) and ±10^k for the decades at or above the threshold, thinned to at most
/// `max_count`. Falls back to [`linear_ticks`] when the range lies within the linear region.
pub fn symlog_ticks(lo: f64, hi: f64, linear_threshold: f64, max_count: usize) -> TickSet {
    if !lo.is_finite() || !hi.is_finite() || linear_threshold.is_nan() || linear_threshold <= 0.0 {
        return TickSet::default();
    }
    let (a, b) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    let c = linear_threshold;
    if a.abs().max(b.abs()) <= 10.0 * c {
        return linear_ticks(a, b, max_count);
    }
    let kc = (c.log10() - 1e-9).ceil() as i32;
    let mut cands: Vec<(f64, String)> = Vec::new();
    let kmax = (a.abs().max(b.abs()).log10() + 1e-9).floor() as i32;
    for k in (kc..=kmax).rev() {
        let v = -pow10(k);
        if v >= a && v <= b {
            cands.push((v, format!("\u{2212}{}", decade_label(k))));
        }
    }
    if a <= 0.0 && b >= 0.0 {
        cands.push((0.0, "0".to_string()));
    }
    for k in kc..=kmax {
        let v = pow10(k);
        if v >= a && v <= b {
            cands.push((v, decade_label(k)));
        }
    }
    let stride = nice_stride(cands.len(), max_count.max(2));
    // Keep zero and every stride-th decade counted outward from zero.
    let zero_at = cands.iter().position(|(v, _)| *v == 0.0);
    let ticks = cands
        .into_iter()
        .enumerate()
        .filter(|(i, _)| match zero_at {
            Some(z) => (*i as i64 - z as i64).rem_euclid(stride as i64) == 0,
            None => i % stride == 0,
        })
        .map(|(_, (value, label))| Tick { value, label })
        .collect();
    TickSet { ticks, exponent: 0 }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn labels(t: &TickSet) -> Vec<&str> {
        t.ticks.iter().map(|t| t.label.as_str()).collect()
    }

    /// Steps must be 1, 2 or 5 times a power of ten; ticks within range, evenly spaced.
    fn check_nice(t: &TickSet, lo: f64, hi: f64, max_count: usize) {
        assert!(t.ticks.len() >= 2, "{lo}..{hi}: {:?}", t);
        assert!(t.ticks.len() <= max_count, "{lo}..{hi}: {:?}", t);
        let step = t.ticks[1].value - t.ticks[0].value;
        let mant = step / 10f64.powf(step.log10().floor());
        assert!(
            [1.0, 2.0, 5.0, 10.0]
                .iter()
                .any(|m| (mant - m).abs() < 1e-6 * m),
            "step {step} is not 1-2-5"
        );
        for w in t.ticks.windows(2) {
            let d = w[1].value - w[0].value;
            assert!(
                (d - step).abs() <= 1e-9 * step.abs(),
                "uneven {d} vs {step}"
            );
        }
        let (a, b) = (lo.min(hi), lo.max(hi));
        let tol = (b - a) * 1e-9;
        for tk in &t.ticks {
            assert!(
                tk.value >= a - tol && tk.value <= b + tol,
                "{} out of {a}..{b}",
                tk.value
            );
        }
        let mut seen = std::collections::HashSet::new();
        for tk in &t.ticks {
            assert!(
                seen.insert(tk.label.clone()),
                "duplicate label {}",
                tk.label
            );
        }
    }

    #[test]
    fn ranges_across_thirty_decades() {
        for e in -15..=15 {
            let hi = 10f64.powi(e) * 3.7;
            let lo = 10f64.powi(e) * 0.2;
            let t = linear_ticks(lo, hi, 7);
            check_nice(&t, lo, hi, 7);
            // Labels stay short: the common factor absorbs the magnitude.
            for tk in &t.ticks {
                assert!(tk.label.chars().count() <= 5, "{e}: label {}", tk.label);
            }
        }
    }

    #[test]
    fn the_full_span_from_1e_minus15_to_1e15() {
        let t = linear_ticks(1e-15, 1e15, 6);
        check_nice(&t, 1e-15, 1e15, 6);
        assert_eq!(t.exponent, 15);
        let t = log_ticks(1e-15, 1e15, 8);
        assert!(t.ticks.len() <= 8 && t.ticks.len() >= 4);
        assert!(t.ticks.iter().all(|t| {
            let k = t.value.log10();
            (k - k.round()).abs() < 1e-9
        }));
        assert!(t.ticks.iter().any(|t| t.label == "10^{0}"));
        assert!(t.ticks.iter().any(|t| t.label == "10^{\u{2212}10}"));
    }

    #[test]
    fn negative_range_uses_true_minus() {
        let t = linear_ticks(-3.2, -0.4, 8);
        check_nice(&t, -3.2, -0.4, 8);
        assert_eq!(
            labels(&t),
            [
                "\u{2212}3.0",
                "\u{2212}2.5",
                "\u{2212}2.0",
                "\u{2212}1.5",
                "\u{2212}1.0",
                "\u{2212}0.5"
            ]
        );
        assert!(t.ticks.iter().all(|t| !t.label.contains('-')));
    }

    #[test]
    fn symmetric_range_has_a_plain_zero() {
        let t = linear_ticks(-1.0, 1.0, 5);
        assert_eq!(
            labels(&t),
            ["\u{2212}1.0", "\u{2212}0.5", "0.0", "0.5", "1.0"]
        );
    }

    #[test]
    fn range_not_containing_zero() {
        let t = linear_ticks(1000.12, 1000.55, 6);
        check_nice(&t, 1000.12, 1000.55, 6);
        assert_eq!(t.exponent, 0);
        assert_eq!(labels(&t), ["1000.2", "1000.3", "1000.4", "1000.5"]);
    }

    #[test]
    fn density_in_units_of_1e12_per_cm2() {
        // 0 … 4.5×10¹⁶ m⁻² is 0 … 4.5×10¹² cm⁻²; here the axis is in cm⁻².
        let t = linear_ticks(-4.5e12, 4.5e12, 10);
        check_nice(&t, -4.5e12, 4.5e12, 10);
        assert_eq!(t.exponent, 12);
        assert_eq!(t.factor_markup(), "×10^{12}");
        assert_eq!(t.ticks.first().unwrap().label, "\u{2212}4");
        assert!(t.ticks.iter().any(|t| t.label == "0"));
        let small = linear_ticks(0.0, 3e-6, 4);
        assert_eq!(small.exponent, -6);
        assert_eq!(small.factor_markup(), "×10^{\u{2212}6}");
    }

    #[test]
    fn degenerate_and_reversed_ranges() {
        let t = linear_ticks(2.5, 2.5, 5);
        assert!(t.ticks.len() >= 2);
        let v: Vec<f64> = t.ticks.iter().map(|t| t.value).collect();
        assert!(v.first().unwrap() <= &2.5 && v.last().unwrap() >= &2.5);
        let z = linear_ticks(0.0, 0.0, 5);
        assert!(z.ticks.iter().any(|t| t.value == 0.0));
        let r = linear_ticks(9.0, 1.0, 5);
        check_nice(&r, 9.0, 1.0, 5);
        assert!(linear_ticks(f64::NAN, 1.0, 5).ticks.is_empty());
        assert!(log_ticks(0.0, 1.0, 5).ticks.is_empty());
    }

    #[test]
    fn log_ticks_at_decades_and_thinned() {
        let t = log_ticks(0.05, 2000.0, 10);
        let v: Vec<f64> = t.ticks.iter().map(|t| t.value).collect();
        assert_eq!(v.len(), 5);
        for (got, want) in v.iter().zip([0.1, 1.0, 10.0, 100.0, 1000.0].iter()) {
            assert!((got / want - 1.0).abs() < 1e-12, "{got} vs {want}");
        }
        let wide = log_ticks(1e-12, 1e12, 6);
        assert!(wide.ticks.len() <= 6);
        let k: Vec<i32> = wide
            .ticks
            .iter()
            .map(|t| t.value.log10().round() as i32)
            .collect();
        assert!(k.windows(2).all(|w| w[1] - w[0] == k[1] - k[0]));
        // Less than two decades: 1-2-5 mantissas, then every integer mantissa.
        let narrow = log_ticks(0.3, 6.2, 8);
        let l: Vec<&str> = narrow.ticks.iter().map(|t| t.label.as_str()).collect();
        assert_eq!(l, ["0.5", "1", "2", "5"]);
        let tight = log_ticks(2.0, 8.0, 8);
        let l: Vec<&str> = tight.ticks.iter().map(|t| t.label.as_str()).collect();
        assert_eq!(l, ["2", "3", "4", "5", "6", "7", "8"]);
        // Little space: the 1-2-5 mantissas only.
        let few = log_ticks(2.0, 8.0, 3);
        let l: Vec<&str> = few.ticks.iter().map(|t| t.label.as_str()).collect();
        assert_eq!(l, ["2", "5"]);
    }

    #[test]
    fn symlog_ticks_are_symmetric_decades() {
        let t = symlog_ticks(-1e4, 1e4, 10.0, 12);
        let v: Vec<f64> = t.ticks.iter().map(|t| t.value).collect();
        assert!(v.contains(&0.0));
        for x in &v {
            assert!(v.iter().any(|y| (y + x).abs() < 1e-9), "{x} has no mirror");
        }
        assert!(v.windows(2).all(|w| w[0] < w[1]));
        assert!(t.ticks.iter().any(|t| t.label == "\u{2212}10^{3}"));
        let thin = symlog_ticks(-1e9, 1e9, 1.0, 5);
        assert!(thin.ticks.len() <= 5 && thin.ticks.iter().any(|t| t.value == 0.0));
    }
}
