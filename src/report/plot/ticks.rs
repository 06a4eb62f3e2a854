//! Axis ticks at "nice" numbers (1, 2 or 5 times a power of ten) and their labels.
//!
//! Method: P. S. Heckbert, "Nice numbers for graph labels", in *Graphics Gems*, ed.
//! A. S. Glassner, Academic Press (1990), pp. 61–63 and 657–659: round the wanted step to
//! 1, 2, 5 or 10 × 10ᵏ, and (for automatic ranges) widen the range to whole steps.
//! Tick values are built as integer × step with the power of ten applied last, so 0.3 is
//! exactly `0.3`, not `0.30000000000000004`.

/// A step of `mantissa × 10^exponent`, mantissa in {1, 2, 5}.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct NiceStep {
    /// 1, 2 or 5.
    pub mantissa: i64,
    /// Power of ten.
    pub exponent: i32,
}

impl NiceStep {
    /// The step as a float.
    pub fn value(&self) -> f64 {
        scaled(self.mantissa, self.exponent)
    }

    /// `k` steps, computed so that decimal values are exact to the last digit.
    pub fn times(&self, k: i64) -> f64 {
        scaled(k * self.mantissa, self.exponent)
    }
}

/// `m × 10^e`, dividing for negative `e` so decimals come out as the nearest float.
fn scaled(m: i64, e: i32) -> f64 {
    if e >= 0 {
        m as f64 * 10f64.powi(e)
    } else {
        m as f64 / 10f64.powi(-e)
    }
}

/// The nice step closest to `raw` (> 0): 1, 2, 5 or 10 × 10ᵏ, with Heckbert's rounding
/// thresholds (1.5, 3, 7).
pub fn nice_step(raw: f64) -> NiceStep {
    let raw = if raw.is_finite() && raw > 0.0 {
        raw
    } else {
        1.0
    };
    let mut e = raw.log10().floor() as i32;
    let f = raw / 10f64.powi(e);
    let m = if f < 1.5 {
        1
    } else if f < 3.0 {
        2
    } else if f < 7.0 {
        5
    } else {
        e += 1;
        1
    };
    NiceStep {
        mantissa: m,
        exponent: e,
    }
}

/// Fraction of a step by which data may pass a tick and still end the axis there.
const SNAP: f64 = 1e-6;

/// Ticks on a linear axis.
#[derive(Debug, Clone, PartialEq)]
pub struct Ticks {
    /// Tick values, increasing.
    pub values: Vec<f64>,
    /// Their spacing.
    pub step: NiceStep,
    /// The axis range: `(lo, hi)` as given, or widened to whole steps by [`nice_ticks`].
    pub range: (f64, f64),
}

/// Ticks for an automatic axis over the data range `[lo, hi]`: about `target` ticks, the
/// range widened to whole steps ("loose" labelling). A zero-width range is widened first
/// (by 10 % of its magnitude, or by 1 around zero).
pub fn nice_ticks(lo: f64, hi: f64, target: usize) -> Ticks {
    let (lo, hi) = widen(lo, hi);
    let step = nice_step((hi - lo) / (target.max(2) - 1) as f64);
    let s = step.value();
    // Data a hair beyond a tick (rounding in sums such as R + A + T) snaps to the tick.
    let k0 = (lo / s + SNAP).floor() as i64;
    let k1 = (hi / s - SNAP).ceil() as i64;
    let values = (k0..=k1).map(|k| step.times(k)).collect();
    Ticks {
        values,
        step,
        range: (step.times(k0), step.times(k1)),
    }
}

/// Ticks inside a fixed range `[lo, hi]` (kept as given): about `target` ticks.
pub fn ticks_within(lo: f64, hi: f64, target: usize) -> Ticks {
    let (lo, hi) = widen(lo, hi);
    let step = nice_step((hi - lo) / (target.max(2) - 1) as f64);
    let s = step.value();
    let tol = 1e-9 * (hi - lo);
    let k0 = ((lo - tol) / s).ceil() as i64;
    let k1 = ((hi + tol) / s).floor() as i64;
    let values = (k0..=k1).map(|k| step.times(k)).collect();
    Ticks {
        values,
        step,
        range: (lo, hi),
    }
}

/// Orders a range and widens an empty or non-finite one.
pub(crate) fn widen(lo: f64, hi: f64) -> (f64, f64) {
    let (lo, hi) = if lo.is_finite() && hi.is_finite() {
        (lo.min(hi), lo.max(hi))
    } else {
        (0.0, 1.0)
    };
    if hi - lo > 1e-300 * lo.abs().max(hi.abs()).max(1.0) && hi > lo {
        (lo, hi)
    } else if lo == 0.0 {
        (-1.0, 1.0)
    } else {
        let d = 0.1 * lo.abs();
        (lo - d, hi + d)
    }
}

/// Labels for the tick `values` of an axis with spacing `step`: as many decimals as the step
/// needs, a true minus sign, and for the whole axis powers of ten (`2×10⁻⁵`) when its largest
/// magnitude is 10⁶ or more, or below 10⁻³.
pub fn tick_labels(values: &[f64], step: NiceStep) -> Vec<String> {
    let max = values.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let sci = max > 0.0 && !(1e-3..1e6).contains(&max);
    values.iter().map(|&v| tick_label(v, step, sci)).collect()
}

/// One tick label (see [`tick_labels`]).
fn tick_label(v: f64, step: NiceStep, sci: bool) -> String {
    if v == 0.0 {
        return "0".to_string();
    }
    if sci {
        // Mantissa with the decimals the step needs at this exponent.
        // The small nudge keeps exact powers of ten (1e-5) from landing one decade low.
        let e = (v.abs().log10() + 1e-9).floor() as i32;
        let decimals = (e - step.exponent).max(0) as usize;
        let mant = minus(&format!("{:.decimals$}", v / 10f64.powi(e)));
        return match mant.as_str() {
            "1" => format!("10{}", superscript(e)),
            "−1" => format!("−10{}", superscript(e)),
            _ => format!("{mant}×10{}", superscript(e)),
        };
    }
    let decimals = (-step.exponent).max(0) as usize;
    minus(&format!("{v:.decimals$}"))
}

/// Label of a power of ten `10^k` on a logarithmic axis.
pub fn decade_label(k: i32) -> String {
    match k {
        -3..=-1 => format!("{:.*}", (-k) as usize, 10f64.powi(k)),
        0..=3 => format!("{}", 10i64.pow(k as u32)),
        _ => format!("10{}", superscript(k)),
    }
}

/// Replaces an ASCII hyphen-minus with the minus sign; "−0" becomes "0".
fn minus(s: &str) -> String {
    let s = s.replace('-', "−");
    if s.trim_start_matches('−')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        s.trim_start_matches('−').to_string()
    } else {
        s
    }
}

/// An integer in superscript digits, e.g. −5 → "⁻⁵".
pub fn superscript(k: i32) -> String {
    const DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut s = String::new();
    if k < 0 {
        s.push('⁻');
    }
    for c in k.unsigned_abs().to_string().chars() {
        s.push(DIGITS[c.to_digit(10).unwrap_or(0) as usize]);
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scientific_labels_keep_the_decimals_of_the_step() {
        let coarse = NiceStep {
            mantissa: 1,
            exponent: 7,
        };
        assert_eq!(tick_labels(&[0.0, 1e7, 2e7], coarse), ["0", "10⁷", "2×10⁷"]);
        let fine = NiceStep {
            mantissa: 5,
            exponent: 6,
        };
        assert_eq!(tick_labels(&[1e7, 1.5e7], fine), ["1.0×10⁷", "1.5×10⁷"]);
        let tiny = NiceStep {
            mantissa: 2,
            exponent: -5,
        };
        assert_eq!(tick_labels(&[-2e-5, 4e-5], tiny), ["−2×10⁻⁵", "4×10⁻⁵"]);
    }
}
