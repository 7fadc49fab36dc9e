//! One coordinate of a map: a named, unit-carrying, strictly increasing vector of SI values.

use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// The physical quantity an axis measures. Values on an axis are always SI.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Quantity {
    /// Single (back) gate voltage V_g, in V.
    Gate,
    /// Top-gate voltage V_t, in V.
    TopGate,
    /// Bottom-gate voltage V_b, in V.
    BottomGate,
    /// Perpendicular magnetic field B, in T.
    Field,
    /// Carrier density n, in m⁻².
    Density,
    /// Displacement field D/ε₀, in V/m.
    Displacement,
    /// Filling factor ν, dimensionless.
    Filling,
    /// Flux per moiré cell φ/φ₀, dimensionless.
    FluxPerCell,
    /// Density per moiré cell n/n₀, dimensionless.
    DensityPerCell,
    /// Temperature, in K.
    Temperature,
    /// Anything else (time, index…), unit given by the axis.
    Other,
}

impl Quantity {
    /// The SI unit symbol of the quantity.
    pub fn si_unit(self) -> &'static str {
        match self {
            Quantity::Gate | Quantity::TopGate | Quantity::BottomGate => "V",
            Quantity::Field => "T",
            Quantity::Density => "m⁻²",
            Quantity::Displacement => "V/m",
            Quantity::Temperature => "K",
            Quantity::Filling | Quantity::FluxPerCell | Quantity::DensityPerCell => "",
            Quantity::Other => "",
        }
    }
    /// The unit a physicist reads this quantity in, and the factor that divides an SI value to
    /// get it: densities in 10¹² cm⁻², D/ε₀ in V/nm, everything else in its SI unit.
    pub fn display_unit(self) -> (&'static str, f64) {
        match self {
            Quantity::Density => ("10¹² cm⁻²", 1e16),
            Quantity::Displacement => ("V/nm", 1e9),
            q => (q.si_unit(), 1.0),
        }
    }
    /// The usual symbol, e.g. `V_g`, `B`, `n`, `ν`.
    pub fn symbol(self) -> &'static str {
        match self {
            Quantity::Gate => "V_g",
            Quantity::TopGate => "V_t",
            Quantity::BottomGate => "V_b",
            Quantity::Field => "B",
            Quantity::Density => "n",
            Quantity::Displacement => "D/ε₀",
            Quantity::Filling => "ν",
            Quantity::FluxPerCell => "φ/φ₀",
            Quantity::DensityPerCell => "n/n₀",
            Quantity::Temperature => "T",
            Quantity::Other => "x",
        }
    }
}

/// A strictly increasing coordinate vector with a name and a unit. Values are SI.
///
/// Invariant (checked by [`Axis::new`]): at least one value, all finite, strictly increasing.
/// Lookups are binary searches, O(log n), and work for uniform and non-uniform axes alike.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Axis {
    /// Display name, e.g. the header it came from (`vg_V`) or `B`.
    pub name: String,
    /// What the axis measures; fixes the SI unit.
    pub quantity: Quantity,
    /// Unit symbol of the stored values (the quantity's SI unit, or a free unit for `Other`).
    pub unit: String,
    values: Vec<f64>,
}

impl Axis {
    /// An axis from SI values; errors if empty, non-finite or not strictly increasing.
    pub fn new(name: impl Into<String>, quantity: Quantity, values: Vec<f64>) -> Result<Axis> {
        let name = name.into();
        let bad = |message: String| Error::BadAxis {
            context: "axis".into(),
            axis: name.clone(),
            message,
        };
        if values.is_empty() {
            return Err(bad("no values".into()));
        }
        if let Some(i) = values.iter().position(|v| !v.is_finite()) {
            return Err(bad(format!(
                "value {} at position {i} is not finite",
                values[i]
            )));
        }
        if let Some(i) = values.windows(2).position(|w| w[1] <= w[0]) {
            return Err(bad(format!(
                "values must strictly increase, but {} is followed by {} at position {}",
                values[i],
                values[i + 1],
                i + 1
            )));
        }
        Ok(Axis {
            unit: quantity.si_unit().to_string(),
            name,
            quantity,
            values,
        })
    }

    /// A uniform axis of `len` points from `start` with spacing `step` (> 0).
    pub fn uniform(
        name: impl Into<String>,
        quantity: Quantity,
        start: f64,
        step: f64,
        len: usize,
    ) -> Result<Axis> {
        if !(step > 0.0) || len == 0 {
            return Err(Error::invalid(
                "uniform axis",
                format!("needs step > 0 and at least one point (step {step}, len {len})"),
            ));
        }
        Axis::new(
            name,
            quantity,
            (0..len).map(|i| start + step * i as f64).collect(),
        )
    }

    /// Same axis with a different free unit label (only meaningful for `Quantity::Other`).
    pub fn with_unit(mut self, unit: impl Into<String>) -> Axis {
        self.unit = unit.into();
        self
    }

    /// The coordinate values, strictly increasing, SI.
    pub fn values(&self) -> &[f64] {
        &self.values
    }
    /// Number of points.
    pub fn len(&self) -> usize {
        self.values.len()
    }
    /// Always false (an axis has at least one point); present for API symmetry.
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }
    /// First (smallest) value.
    pub fn min(&self) -> f64 {
        self.values[0]
    }
    /// Last (largest) value.
    pub fn max(&self) -> f64 {
        self.values[self.values.len() - 1]
    }
    /// Median spacing between neighbours (0 for a one-point axis).
    pub fn median_step(&self) -> f64 {
        let mut d: Vec<f64> = self.values.windows(2).map(|w| w[1] - w[0]).collect();
        if d.is_empty() {
            return 0.0;
        }
        let mid = d.len() / 2;
        *d.select_nth_unstable_by(mid, |a, b| a.total_cmp(b)).1
    }
    /// True if every spacing equals the median within `rel_tol` of it.
    pub fn is_uniform(&self, rel_tol: f64) -> bool {
        let m = self.median_step();
        self.values
            .windows(2)
            .all(|w| ((w[1] - w[0]) - m).abs() <= rel_tol * m)
    }

    /// Fractional index of `v`: `i + f` where `values[i] ≤ v ≤ values[i+1]` and `f` is the
    /// linear position between them. `None` outside `[min, max]` or for NaN. O(log n).
    pub fn fractional_index(&self, v: f64) -> Option<f64> {
        let x = &self.values;
        if !(v >= x[0] && v <= x[x.len() - 1]) {
            return None;
        }
        if x.len() == 1 {
            return Some(0.0);
        }
        let i = x.partition_point(|&a| a <= v).clamp(1, x.len() - 1) - 1;
        Some(i as f64 + (v - x[i]) / (x[i + 1] - x[i]))
    }

    /// Index of the value nearest to `v` (clamped to the ends); `None` for NaN. O(log n).
    pub fn nearest_index(&self, v: f64) -> Option<usize> {
        if v.is_nan() {
            return None;
        }
        let x = &self.values;
        let j = x.partition_point(|&a| a < v);
        if j == 0 {
            return Some(0);
        }
        if j == x.len() {
            return Some(x.len() - 1);
        }
        Some(if v - x[j - 1] <= x[j] - v { j - 1 } else { j })
    }

    /// Value at a fractional index (linear between points); `None` outside `[0, len−1]`.
    pub fn value_at(&self, f: f64) -> Option<f64> {
        let n = self.values.len();
        if !(f >= 0.0 && f <= (n - 1) as f64) {
            return None;
        }
        let i = (f.floor() as usize).min(n.saturating_sub(2));
        if n == 1 {
            return Some(self.values[0]);
        }
        let t = f - i as f64;
        Some(self.values[i] + t * (self.values[i + 1] - self.values[i]))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_bad_values() {
        assert!(Axis::new("x", Quantity::Gate, vec![]).is_err());
        assert!(Axis::new("x", Quantity::Gate, vec![1.0, 1.0]).is_err());
        assert!(Axis::new("x", Quantity::Gate, vec![1.0, 0.5]).is_err());
        assert!(Axis::new("x", Quantity::Gate, vec![0.0, f64::NAN]).is_err());
        let e = Axis::new("b_T", Quantity::Field, vec![0.0, 2.0, 1.0])
            .unwrap_err()
            .to_string();
        assert!(e.contains("b_T") && e.contains("position 2"), "{e}");
    }

    #[test]
    fn lookups_on_non_uniform_axis() {
        let a = Axis::new("B", Quantity::Field, vec![0.0, 1.0, 3.0, 7.0]).unwrap();
        assert_eq!(a.fractional_index(0.0), Some(0.0));
        assert_eq!(a.fractional_index(2.0), Some(1.5));
        assert_eq!(a.fractional_index(7.0), Some(3.0));
        assert_eq!(a.fractional_index(5.0), Some(2.5));
        assert_eq!(a.fractional_index(7.5), None);
        assert_eq!(a.fractional_index(f64::NAN), None);
        assert_eq!(a.nearest_index(1.9), Some(1));
        assert_eq!(a.nearest_index(2.1), Some(2));
        assert_eq!(a.nearest_index(-4.0), Some(0));
        assert_eq!(a.nearest_index(40.0), Some(3));
        assert_eq!(a.value_at(2.5), Some(5.0));
        assert_eq!(a.median_step(), 2.0);
        assert!(!a.is_uniform(1e-6));
        let u = Axis::uniform("V", Quantity::Gate, -1.0, 0.25, 9).unwrap();
        assert!(u.is_uniform(1e-9));
        assert_eq!(u.max(), 1.0);
        assert_eq!(u.fractional_index(0.1), Some(4.4));
    }
}
