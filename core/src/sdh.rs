//! Shubnikov–de Haas analysis of one R_xx trace at fixed gate voltage or fixed density:
//! frequency B_F by Fourier transform in 1/B, density n = g·e·B_F/h, and the Landau-index
//! (Berry-phase) fit.
//!
//! Steps: restrict to a field window → resample uniformly in 1/B (linear interpolation in B) →
//! subtract a smooth background (a polynomial in 1/B, or nothing) → multiply by a window →
//! zero-pad → FFT → peaks with sub-bin (Gaussian, i.e. parabolic in log-amplitude)
//! interpolation, harmonics marked → n = g e B_F / h. Frequencies are in T (the conjugate of
//! 1/B in T⁻¹).
//!
//! # Landau-index convention
//! R_xx minima are numbered by consecutive integers N, increasing with 1/B, and N is fitted
//! against 1/B_N: N = B_F·(1/B_N) + N₀. A minimum sits at filling ν = g(N − N₀), so the
//! intercept is N₀ = −½ for a Berry phase π (monolayer graphene, ν = 4(N+½)) and N₀ = 0 for a
//! Berry phase 0 or 2π (conventional gas or bilayer graphene, ν = 4N). The integer labels are
//! chosen so that N₀ falls in (−¾, ¼]; the Berry phase reported is φ_B = −2π N₀ taken in
//! [0, 2π) (an intercept of 0 reads "0 or 2π").

use crate::constants::E_OVER_H;
use crate::error::{Error, Result};
use crate::fit::{eval_poly, fit_line, fit_poly, LineFit};
use crate::gate::SingleGate;
use crate::map::{ChannelKind, Map, Quantity};
use rustfft::{num_complex::Complex, FftPlanner};
use serde::{Deserialize, Serialize};

/// Largest padded FFT length accepted (2²⁴ points).
pub const MAX_FFT_LEN: usize = 1 << 24;
/// Statement of the Landau-index convention, written into every result.
pub const INDEX_CONVENTION: &str =
    "R_xx minima numbered by consecutive integers N (increasing with 1/B); \
fit N = B_F·(1/B_N) + N0; a minimum sits at ν = g(N − N0); N0 = −1/2 ↔ Berry phase π, \
N0 = 0 ↔ Berry phase 0 or 2π; labels chosen so that N0 with the slope held at the spectrum's \
B_F falls in (−3/4, 1/4]";

/// An R_xx trace against field: the input of the analysis.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Trace {
    /// Field values B in T (any order; NaN points are dropped).
    #[serde(rename = "b_T")]
    pub b_t: Vec<f64>,
    /// R_xx in Ω at each field.
    pub rxx_ohm: Vec<f64>,
}

/// Smooth background removed before the transform.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum Background {
    /// Nothing removed (only the transform's DC bin is ignored).
    None,
    /// A least-squares polynomial in 1/B of this degree (0 = the mean).
    Polynomial {
        /// Degree of the polynomial.
        degree: usize,
    },
}

/// Window applied to the detrended trace before the transform.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Window {
    /// No window (rectangular).
    Rectangular,
    /// Hann window 0.5 − 0.5 cos(2πk/(M−1)).
    Hann,
    /// Hamming window 0.54 − 0.46 cos(2πk/(M−1)).
    Hamming,
    /// Blackman window 0.42 − 0.5 cos(2πk/(M−1)) + 0.08 cos(4πk/(M−1)).
    Blackman,
}

impl Window {
    /// Weight of sample `k` of `m` (symmetric window).
    pub fn weight(self, k: usize, m: usize) -> f64 {
        if m < 2 {
            return 1.0;
        }
        let x = 2.0 * std::f64::consts::PI * k as f64 / (m - 1) as f64;
        match self {
            Window::Rectangular => 1.0,
            Window::Hann => 0.5 - 0.5 * x.cos(),
            Window::Hamming => 0.54 - 0.46 * x.cos(),
            Window::Blackman => 0.42 - 0.5 * x.cos() + 0.08 * (2.0 * x).cos(),
        }
    }
    /// Parse `rect`, `hann`, `hamming` or `blackman`.
    pub fn parse(text: &str) -> Result<Window> {
        Ok(match text.trim().to_ascii_lowercase().as_str() {
            "rect" | "rectangular" | "none" => Window::Rectangular,
            "hann" => Window::Hann,
            "hamming" => Window::Hamming,
            "blackman" => Window::Blackman,
            other => {
                return Err(Error::invalid(
                    "window",
                    format!("`{other}` is not a window; use rect, hann, hamming or blackman"),
                ))
            }
        })
    }
}

/// Choices of the analysis.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SdhOptions {
    /// Field window (B_min, B_max) in T, 0 < B_min < B_max.
    #[serde(rename = "field_window_T")]
    pub field_window_t: (f64, f64),
    /// Points of the uniform 1/B grid; `None`: twice the trace's points in the window, at least
    /// 512, rounded up to a power of two.
    pub points: Option<usize>,
    /// Background removed before the transform.
    pub background: Background,
    /// Window applied before the transform.
    pub window: Window,
    /// Padded transform length; `None`: the next power of two ≥ 16 × points.
    pub padded_len: Option<usize>,
    /// Landau-level degeneracy g in n = g e B_F / h (4 for graphene: spin × valley).
    pub degeneracy: f64,
    /// Peaks weaker than this fraction of the strongest are not reported.
    pub peak_threshold: f64,
    /// Fewest oscillations of the fundamental the window must hold.
    pub min_oscillations: f64,
    /// Do the Landau-index (Berry-phase) fit.
    pub index_fit: bool,
    /// Gate model used to state the calibrated density of a fixed-gate trace.
    pub gate: Option<SingleGate>,
}

impl SdhOptions {
    /// Defaults for the field window (B_min, B_max) in T: cubic background in 1/B, Hann window,
    /// g = 4, peaks above 10 % of the strongest, at least 3 oscillations, index fit on.
    pub fn for_window(b_min_t: f64, b_max_t: f64) -> SdhOptions {
        SdhOptions {
            field_window_t: (b_min_t, b_max_t),
            points: None,
            background: Background::Polynomial { degree: 3 },
            window: Window::Hann,
            padded_len: None,
            degeneracy: 4.0,
            peak_threshold: 0.1,
            min_oscillations: 3.0,
            index_fit: true,
            gate: None,
        }
    }
    /// The same options with a gate model for the calibrated density.
    pub fn with_gate(mut self, gate: SingleGate) -> SdhOptions {
        self.gate = Some(gate);
        self
    }
}

/// Where on a map to take the trace.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum At {
    /// Fixed gate voltage, V (map over gate voltage and field).
    Gate(f64),
    /// Fixed density, m⁻² (map over density and field).
    Density(f64),
}

/// The trace on the uniform 1/B grid, before and after the background.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InverseFieldTrace {
    /// 1/B in T⁻¹, uniform and increasing.
    #[serde(rename = "inv_b_per_T")]
    pub inv_b: Vec<f64>,
    /// R_xx interpolated onto the grid, Ω.
    pub rxx_ohm: Vec<f64>,
    /// The background at each point, Ω.
    pub background_ohm: Vec<f64>,
    /// R_xx minus the background, Ω (what was windowed and transformed).
    pub oscillation_ohm: Vec<f64>,
}

/// Amplitude spectrum of the windowed trace.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Spectrum {
    /// Frequency of each bin, T (bin k: k / (padded length · Δ(1/B))).
    #[serde(rename = "frequency_T")]
    pub frequency_t: Vec<f64>,
    /// |FFT| of each bin, Ω (scaled by 2/Σw so a pure cosine of amplitude A reads ≈ A).
    pub amplitude_ohm: Vec<f64>,
    /// Frequency step between bins, T.
    #[serde(rename = "bin_T")]
    pub bin_t: f64,
}

/// A spectral peak.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Peak {
    /// Interpolated frequency, T.
    #[serde(rename = "frequency_T")]
    pub frequency_t: f64,
    /// Interpolated amplitude, Ω.
    pub amplitude_ohm: f64,
    /// If this peak is the k-th harmonic of the fundamental (k ≥ 2), k; 1 for the
    /// fundamental; 0 for an unrelated peak.
    pub harmonic: u32,
    /// Density g e f / h of this frequency, m⁻².
    pub density_m2: f64,
}

/// One R_xx minimum of the Landau-index plot.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct IndexPoint {
    /// Field of the minimum, T.
    #[serde(rename = "b_T")]
    pub b_t: f64,
    /// 1/B of the minimum, T⁻¹.
    #[serde(rename = "inv_b_per_T")]
    pub inv_b: f64,
    /// Landau index N assigned.
    pub index: i64,
}

/// The Landau-index fit and the Berry phase it implies.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct IndexFit {
    /// The minima used.
    pub points: Vec<IndexPoint>,
    /// Fit N = slope·(1/B) + intercept: slope in T, intercept dimensionless.
    pub fit: LineFit,
    /// Intercept N₀ (the convention above).
    pub intercept: f64,
    /// Its standard error.
    pub intercept_err: f64,
    /// Berry phase φ_B / π in [0, 2).
    pub berry_phase_over_pi: f64,
    /// Its standard error, in units of π.
    pub berry_phase_err_over_pi: f64,
    /// Frequency from the slope, T.
    #[serde(rename = "frequency_from_slope_T")]
    pub frequency_from_slope_t: f64,
    /// The same minima with the slope held at the spectrum's fundamental B_F, which the whole
    /// trace fixes far better than a few minima do: N₀ = mean(N − B_F/B_N) (common practice
    /// when only a few minima are in the window).
    pub at_spectrum_slope: InterceptAtSlope,
    /// The indexing convention, in words.
    pub convention: String,
}

/// The Landau-index intercept with the slope held at a given frequency.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InterceptAtSlope {
    /// The slope held, T.
    #[serde(rename = "slope_T")]
    pub slope_t: f64,
    /// Intercept N₀ with the same labels as the free fit.
    pub intercept: f64,
    /// Its standard error: the scatter of N − B_F/B_N over √(points) (with k − 1 degrees of
    /// freedom).
    pub intercept_err: f64,
    /// Berry phase φ_B / π in [0, 2).
    pub berry_phase_over_pi: f64,
    /// Its standard error, in units of π.
    pub berry_phase_err_over_pi: f64,
}

/// N₀ = mean(N − slope·x) and its standard error.
fn intercept_at_slope(x: &[f64], y: &[f64], slope: f64) -> InterceptAtSlope {
    let k = x.len() as f64;
    let r: Vec<f64> = x.iter().zip(y).map(|(&x, &y)| y - slope * x).collect();
    let mean = r.iter().sum::<f64>() / k;
    let var = r.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (k - 1.0).max(1.0);
    let err = (var / k).sqrt();
    InterceptAtSlope {
        slope_t: slope,
        intercept: mean,
        intercept_err: err,
        berry_phase_over_pi: (-2.0 * mean).rem_euclid(2.0),
        berry_phase_err_over_pi: 2.0 * err,
    }
}

/// Everything the analysis found, and what a figure needs to show it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SdhResult {
    /// The options used.
    pub options: SdhOptions,
    /// Where the trace was taken, if from a map.
    pub at: Option<At>,
    /// The trace in 1/B.
    pub trace: InverseFieldTrace,
    /// The amplitude spectrum (up to half the sampling frequency).
    pub spectrum: Spectrum,
    /// Peaks above the threshold, strongest first.
    pub peaks: Vec<Peak>,
    /// The fundamental frequency B_F, T.
    #[serde(rename = "frequency_T")]
    pub frequency_t: f64,
    /// Oscillations of the fundamental inside the window, B_F·(1/B_min − 1/B_max).
    pub oscillations: f64,
    /// Density n = g e B_F / h, m⁻².
    pub density_m2: f64,
    /// The calibrated density at this trace (gate model, or the map's density axis), m⁻².
    pub calibrated_density_m2: Option<f64>,
    /// (n_SdH − n_calibrated)/|n_calibrated|.
    pub density_mismatch: Option<f64>,
    /// The Landau-index fit, when asked for and possible.
    pub index: Option<IndexFit>,
    /// Why the index fit was not made, when it was asked for but not possible.
    pub index_error: Option<String>,
}

fn window_err(opts: &SdhOptions, message: String) -> Error {
    Error::invalid(
        format!(
            "SdH field window {}–{} T",
            opts.field_window_t.0, opts.field_window_t.1
        ),
        message,
    )
}

/// The R_xx trace of `map` at a fixed gate voltage or density (the nearest column of the
/// map's gate or density axis; the other axis must be the field).
pub fn trace_from_map(map: &Map, at: At) -> Result<(Trace, f64)> {
    let (q, v) = match at {
        At::Gate(v) => (Quantity::Gate, v),
        At::Density(n) => (Quantity::Density, n),
    };
    let (which, axis) = map.require_axis(
        q,
        &format!("a trace at fixed {0} needs a {0} axis", q.symbol()),
    )?;
    let other = if which == 'x' { map.y() } else { map.x() };
    if other.quantity != Quantity::Field {
        return Err(Error::MapRequirement(format!(
            "a SdH trace needs a field axis; the other axis is `{}` ({:?})",
            other.name, other.quantity
        )));
    }
    if !(v >= axis.min() && v <= axis.max()) {
        return Err(Error::invalid(
            format!("trace position {}", q.symbol()),
            format!(
                "{v} {} is outside the map's range {}…{} {}",
                q.si_unit(),
                axis.min(),
                axis.max(),
                q.si_unit()
            ),
        ));
    }
    let i = axis.nearest_index(v).unwrap_or(0);
    let data = &map.require(ChannelKind::Rxx)?.data;
    let rxx: Vec<f64> = if which == 'x' {
        data.column(i).to_vec()
    } else {
        data.row(i).to_vec()
    };
    Ok((
        Trace {
            b_t: other.values().to_vec(),
            rxx_ohm: rxx,
        },
        axis.values()[i],
    ))
}

/// Resample the trace onto `points` values uniform in 1/B over the window, by linear
/// interpolation in B between the measured points (NaN points dropped).
pub fn resample_inverse_field(trace: &Trace, opts: &SdhOptions) -> Result<(Vec<f64>, Vec<f64>)> {
    let (b_lo, b_hi) = opts.field_window_t;
    if !(b_lo > 0.0 && b_hi > b_lo && b_hi.is_finite()) {
        return Err(window_err(
            opts,
            "needs 0 < B_min < B_max (the analysis works in 1/B)".into(),
        ));
    }
    if trace.b_t.len() != trace.rxx_ohm.len() {
        return Err(Error::invalid(
            "SdH trace",
            format!(
                "{} field values but {} R_xx values",
                trace.b_t.len(),
                trace.rxx_ohm.len()
            ),
        ));
    }
    let mut pts: Vec<(f64, f64)> = trace
        .b_t
        .iter()
        .zip(&trace.rxx_ohm)
        .filter(|(b, r)| b.is_finite() && r.is_finite())
        .map(|(&b, &r)| (b.abs(), r))
        .collect();
    pts.sort_by(|a, b| a.0.total_cmp(&b.0));
    pts.dedup_by(|a, b| a.0 == b.0);
    let inside = pts.iter().filter(|p| p.0 >= b_lo && p.0 <= b_hi).count();
    let first = pts.first().map_or(f64::NAN, |p| p.0);
    let last = pts.last().map_or(f64::NAN, |p| p.0);
    if !(first <= b_lo * (1.0 + 1e-9) && last >= b_hi * (1.0 - 1e-9)) || inside < 8 {
        return Err(window_err(
            opts,
            format!(
                "the trace covers {first}–{last} T with {inside} finite points inside the window; \
                 the window must lie inside the measured range and hold at least 8 points"
            ),
        ));
    }
    let m = match opts.points {
        Some(m) if m >= 16 => m,
        Some(m) => {
            return Err(window_err(
                opts,
                format!("{m} resampling points; need ≥ 16"),
            ))
        }
        None => (2 * inside).max(512).next_power_of_two(),
    };
    let (x0, x1) = (1.0 / b_hi, 1.0 / b_lo);
    let step = (x1 - x0) / (m - 1) as f64;
    let mut inv_b = Vec::with_capacity(m);
    let mut vals = Vec::with_capacity(m);
    for k in 0..m {
        let x = x0 + step * k as f64;
        let b = (1.0 / x).clamp(b_lo, b_hi);
        let j = pts.partition_point(|p| p.0 < b).clamp(1, pts.len() - 1);
        let (ba, ra) = pts[j - 1];
        let (bb, rb) = pts[j];
        let t = if bb > ba { (b - ba) / (bb - ba) } else { 0.0 };
        inv_b.push(x);
        vals.push(ra + t.clamp(0.0, 1.0) * (rb - ra));
    }
    Ok((inv_b, vals))
}

/// Amplitude spectrum of `values` sampled every `step` (T⁻¹) after `window`, zero-padded to
/// `padded_len` (≥ values.len()). Bins from 0 up to half the sampling frequency.
pub fn amplitude_spectrum(
    values: &[f64],
    step: f64,
    window: Window,
    padded_len: usize,
) -> Result<Spectrum> {
    let m = values.len();
    if m < 4 || padded_len < m || padded_len > MAX_FFT_LEN || !(step > 0.0) {
        return Err(Error::invalid(
            "spectrum",
            format!(
                "needs ≥ 4 samples, a positive step and a padded length between the sample count \
                 and {MAX_FFT_LEN} (samples {m}, padded {padded_len}, step {step})"
            ),
        ));
    }
    let mut buf: Vec<Complex<f64>> = vec![Complex::new(0.0, 0.0); padded_len];
    let mut wsum = 0.0;
    for (k, &v) in values.iter().enumerate() {
        let w = window.weight(k, m);
        wsum += w;
        buf[k] = Complex::new(v * w, 0.0);
    }
    let mut planner = FftPlanner::<f64>::new();
    planner.plan_fft_forward(padded_len).process(&mut buf);
    let half = padded_len / 2 + 1;
    let bin = 1.0 / (padded_len as f64 * step);
    let scale = if wsum > 0.0 { 2.0 / wsum } else { 0.0 };
    Ok(Spectrum {
        frequency_t: (0..half).map(|k| k as f64 * bin).collect(),
        amplitude_ohm: buf[..half].iter().map(|c| c.norm() * scale).collect(),
        bin_t: bin,
    })
}

/// Local maxima of the spectrum above `f_min` (T) and above `threshold` × the strongest, with
/// their frequency and amplitude refined by a parabola through the log-amplitudes of the three
/// bins around each (exact for a Gaussian peak). Strongest first.
pub fn find_peaks(spec: &Spectrum, f_min: f64, threshold: f64) -> Vec<(f64, f64)> {
    let a = &spec.amplitude_ohm;
    let mut out = Vec::new();
    for k in 1..a.len().saturating_sub(1) {
        if spec.frequency_t[k] < f_min || !(a[k] > a[k - 1] && a[k] >= a[k + 1]) {
            continue;
        }
        let (l, c, r) = (a[k - 1].ln(), a[k].ln(), a[k + 1].ln());
        let denom = l - 2.0 * c + r;
        let (delta, amp) = if denom < 0.0 && l.is_finite() && r.is_finite() {
            let d = 0.5 * (l - r) / denom;
            (d, (c - 0.25 * (l - r) * d).exp())
        } else {
            (0.0, a[k])
        };
        out.push(((k as f64 + delta) * spec.bin_t, amp));
    }
    let top = out.iter().fold(0.0f64, |m, p| m.max(p.1));
    out.retain(|p| p.1 >= threshold * top);
    out.sort_by(|p, q| q.1.total_cmp(&p.1));
    out
}

/// Analyse a trace: spectrum, peaks, fundamental, density and (if asked) the index fit.
pub fn analyse_trace(trace: &Trace, opts: &SdhOptions) -> Result<SdhResult> {
    if !(opts.degeneracy > 0.0 && opts.degeneracy.is_finite()) {
        return Err(Error::invalid(
            "degeneracy g",
            format!("must be positive, got {}", opts.degeneracy),
        ));
    }
    let (inv_b, rxx) = resample_inverse_field(trace, opts)?;
    let m = inv_b.len();
    let step = inv_b[1] - inv_b[0];
    let range = inv_b[m - 1] - inv_b[0];
    let background = match opts.background {
        Background::None => vec![0.0; m],
        Background::Polynomial { degree } => {
            let (c, mid, half) = fit_poly(&inv_b, &rxx, degree)?;
            inv_b.iter().map(|&x| eval_poly(&c, mid, half, x)).collect()
        }
    };
    let osc: Vec<f64> = rxx.iter().zip(&background).map(|(r, b)| r - b).collect();
    let padded = match opts.padded_len {
        Some(p) => p,
        None => (16 * m).next_power_of_two().min(MAX_FFT_LEN),
    };
    let spectrum = amplitude_spectrum(&osc, step, opts.window, padded)?;
    // Below ~1.5 periods per window the background and the window's main lobe dominate.
    let f_min = 1.5 / range;
    let raw = find_peaks(&spectrum, f_min, opts.peak_threshold);
    let Some(&(f_strong, a_strong)) = raw.first() else {
        return Err(window_err(
            opts,
            format!(
                "no oscillation found: the spectrum has no peak above {f_min:.3} T \
                 (fewer than 1.5 oscillations in 1/B ∈ [{:.4}, {:.4}] T⁻¹)",
                inv_b[0],
                inv_b[m - 1]
            ),
        ));
    };
    // The fundamental is the strongest peak, unless a peak at half (a third…) of its frequency
    // with at least a quarter of its amplitude exists (then the strongest is a harmonic).
    let tol = |f: f64| (2.0 / range).max(0.02 * f);
    let mut fundamental = (f_strong, a_strong);
    for k in [3.0, 2.0] {
        if let Some(p) = raw
            .iter()
            .find(|p| (p.0 * k - f_strong).abs() < tol(f_strong) && p.1 >= 0.25 * a_strong)
        {
            fundamental = *p;
            break;
        }
    }
    let f0 = fundamental.0;
    let per = opts.degeneracy * E_OVER_H;
    let peaks: Vec<Peak> = raw
        .iter()
        .map(|&(f, a)| {
            let ratio = f / f0;
            let k = ratio.round();
            let harmonic = if k >= 1.0 && (f - k * f0).abs() < tol(f) {
                k as u32
            } else {
                0
            };
            Peak {
                frequency_t: f,
                amplitude_ohm: a,
                harmonic,
                density_m2: per * f,
            }
        })
        .collect();
    let oscillations = f0 * range;
    if oscillations < opts.min_oscillations {
        return Err(window_err(
            opts,
            format!(
                "the fundamental B_F = {f0:.4} T gives only {oscillations:.2} oscillations in the \
                 window (need {}); widen the field window",
                opts.min_oscillations
            ),
        ));
    }
    let trace_out = InverseFieldTrace {
        inv_b,
        rxx_ohm: rxx,
        background_ohm: background,
        oscillation_ohm: osc,
    };
    let (index, index_error) = if opts.index_fit {
        match index_fit(&trace_out.inv_b, &trace_out.oscillation_ohm, f0) {
            Ok(f) => (Some(f), None),
            Err(e) => (None, Some(e.to_string())),
        }
    } else {
        (None, None)
    };
    Ok(SdhResult {
        options: opts.clone(),
        at: None,
        trace: trace_out,
        spectrum,
        peaks,
        frequency_t: f0,
        oscillations,
        density_m2: per * f0,
        calibrated_density_m2: None,
        density_mismatch: None,
        index,
        index_error,
    })
}

/// Analyse the trace of `map` at a fixed gate voltage or density. The calibrated density is the
/// map's density axis value, or the gate model's density at the gate voltage when
/// `opts.gate` is given. The SdH density carries the sign of the calibrated density.
pub fn analyse(map: &Map, at: At, opts: &SdhOptions) -> Result<SdhResult> {
    let (trace, used) = trace_from_map(map, at)?;
    let mut r = analyse_trace(&trace, opts)?;
    let calibrated = match at {
        At::Density(_) => Some(used),
        At::Gate(_) => opts.gate.map(|g| g.density(used)),
    };
    r.at = Some(match at {
        At::Gate(_) => At::Gate(used),
        At::Density(_) => At::Density(used),
    });
    if let Some(nc) = calibrated {
        if nc < 0.0 {
            r.density_m2 = -r.density_m2;
        }
        r.calibrated_density_m2 = Some(nc);
        if nc != 0.0 {
            r.density_mismatch = Some((r.density_m2 - nc) / nc.abs());
        }
    }
    Ok(r)
}

/// Minima of the oscillation (uniform in 1/B) at least half a period apart and below zero,
/// refined by a parabola; numbered, fitted and turned into a Berry phase (module docs).
pub fn index_fit(inv_b: &[f64], osc: &[f64], frequency_t: f64) -> Result<IndexFit> {
    let m = inv_b.len();
    if m < 8 || !(frequency_t > 0.0) {
        return Err(Error::invalid(
            "Landau-index fit",
            "needs a trace of at least 8 points and a positive frequency",
        ));
    }
    let step = inv_b[1] - inv_b[0];
    let half = ((0.5 / frequency_t) / step).floor().max(1.0) as usize;
    let mut minima = Vec::new();
    for k in 1..m - 1 {
        if !(osc[k] < 0.0) {
            continue;
        }
        let lo = k.saturating_sub(half);
        let hi = (k + half).min(m - 1);
        // A minimum whose half-period neighbourhood is cut by the window's edge is not trusted.
        if k < half || k + half > m - 1 {
            continue;
        }
        if (lo..=hi).all(|j| j == k || osc[j] > osc[k]) {
            let (l, c, r) = (osc[k - 1], osc[k], osc[k + 1]);
            let d = l - 2.0 * c + r;
            let delta = if d > 0.0 { 0.5 * (l - r) / d } else { 0.0 };
            minima.push(inv_b[k] + delta.clamp(-0.5, 0.5) * step);
        }
    }
    if minima.len() < 3 {
        return Err(Error::invalid(
            "Landau-index fit",
            format!(
                "found {} R_xx minima in the window, need at least 3",
                minima.len()
            ),
        ));
    }
    // Consecutive labels; check that neighbours are about one period apart.
    let period = 1.0 / frequency_t;
    let mut labels = vec![0i64];
    for w in minima.windows(2) {
        let jump = ((w[1] - w[0]) / period).round().max(1.0) as i64;
        let last = *labels.last().unwrap_or(&0);
        labels.push(last + jump);
    }
    let x: Vec<f64> = minima.clone();
    let y0: Vec<f64> = labels.iter().map(|&n| n as f64).collect();
    // Shift the labels by an integer so that the intercept at the spectrum's slope (the
    // better-determined one when there are few minima) falls in (−3/4, 1/4].
    let shift = (0.25 - intercept_at_slope(&x, &y0, frequency_t).intercept).floor();
    let labels: Vec<i64> = labels.iter().map(|&n| n + shift as i64).collect();
    let y: Vec<f64> = labels.iter().map(|&n| n as f64).collect();
    let fit = fit_line(&x, &y)?;
    let berry = (-2.0 * fit.intercept).rem_euclid(2.0);
    let at_spectrum_slope = intercept_at_slope(&x, &y, frequency_t);
    Ok(IndexFit {
        points: minima
            .iter()
            .zip(&labels)
            .map(|(&xb, &n)| IndexPoint {
                b_t: 1.0 / xb,
                inv_b: xb,
                index: n,
            })
            .collect(),
        intercept: fit.intercept,
        intercept_err: fit.intercept_err,
        berry_phase_over_pi: berry,
        berry_phase_err_over_pi: 2.0 * fit.intercept_err,
        frequency_from_slope_t: fit.slope,
        at_spectrum_slope,
        fit,
        convention: INDEX_CONVENTION.into(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn synthetic(b_f: f64, n0: f64, window: (f64, f64), points: usize) -> Trace {
        // Minima of R at B_F/B = N − N0, i.e. R = 100 − 10 cos(2π(B_F/B + N0)).
        let (lo, hi) = window;
        let b: Vec<f64> = (0..points)
            .map(|i| lo * 0.9 + (hi * 1.05 - lo * 0.9) * i as f64 / (points - 1) as f64)
            .collect();
        let r = b
            .iter()
            .map(|&x| 100.0 - 10.0 * (2.0 * std::f64::consts::PI * (b_f / x + n0)).cos())
            .collect();
        Trace { b_t: b, rxx_ohm: r }
    }

    #[test]
    fn intercepts_for_both_berry_phases() {
        // Minima at ν = 4(N + ½) give N₀ = −½ and at ν = 4N give N₀ = 0 (check-values §10).
        for (n0, berry) in [(-0.5, 1.0), (0.0, 0.0)] {
            let t = synthetic(10.339_169, n0, (1.0, 8.0), 4000);
            let r = analyse_trace(&t, &SdhOptions::for_window(1.0, 8.0)).unwrap();
            let idx = r.index.expect("index fit");
            assert!((idx.intercept - n0).abs() < 0.02, "{}", idx.intercept);
            let d = (idx.berry_phase_over_pi - berry).abs();
            assert!(d.min(2.0 - d) < 0.04, "{}", idx.berry_phase_over_pi);
            assert!((r.frequency_t / 10.339_169 - 1.0).abs() < 5e-3);
            // Held at the spectrum's B_F the intercept agrees with the free fit.
            let held = &idx.at_spectrum_slope;
            assert_eq!(held.slope_t, r.frequency_t);
            assert!((held.intercept - n0).abs() < 0.03, "{}", held.intercept);
            assert!(held.intercept_err > 0.0 && held.intercept_err < 0.05);
        }
    }

    #[test]
    fn held_slope_intercept_is_the_mean_offset() {
        // N = 10·x − 0.5 with alternating ±0.01 scatter: mean offset −0.5, and the scatter
        // (sample std 0.01095 for four points) over √4.
        let x = [0.1, 0.2, 0.3, 0.4];
        let y: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(i, &x)| 10.0 * x - 0.5 + if i % 2 == 0 { 0.01 } else { -0.01 })
            .collect();
        let h = intercept_at_slope(&x, &y, 10.0);
        assert!((h.intercept + 0.5).abs() < 1e-12);
        let want = (4.0 * 0.01f64.powi(2) / 3.0).sqrt() / 2.0;
        assert!((h.intercept_err - want).abs() < 1e-12);
        assert!((h.berry_phase_over_pi - 1.0).abs() < 1e-12);
    }

    #[test]
    fn window_errors_are_clear() {
        let t = synthetic(10.0, 0.0, (1.0, 8.0), 400);
        let e = analyse_trace(&t, &SdhOptions::for_window(0.5, 8.0)).unwrap_err();
        assert!(e.to_string().contains("inside the measured range"), "{e}");
        let e = analyse_trace(&t, &SdhOptions::for_window(-1.0, 8.0)).unwrap_err();
        assert!(e.to_string().contains("0 < B_min"), "{e}");
        assert!(Window::parse("kaiser").is_err());
    }
}
