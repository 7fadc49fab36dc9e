//! What the viewer looks at: the map, its calibration, its channels, the snapping features, the
//! indexed states and a level-of-detail pyramid for fast redraws. Built once when a file is
//! opened and shared read-only by every view state.

use super::lod::Pyramid;
use fanmark_core::conductivity::SampleGeometry;
use fanmark_core::constants::{E2_OVER_H, E_OVER_H, VON_KLITZING_R_K};
use fanmark_core::derived::{derive, DeriveOptions, DerivedQuantity};
use fanmark_core::gate::SingleGate;
use fanmark_core::index::features::{find_minima, gap_map, FeatureIndex, GapMapOptions};
use fanmark_core::index::run::{HallCheck, IndexedState};
use fanmark_core::index::stack::Stack;
use fanmark_core::index::{index_map, IndexOptions};
use fanmark_core::map::{ChannelKind, Map};
use fanmark_core::{Rational, Result};
use ndarray::Array2;
use std::path::PathBuf;

/// Which quantity the heat map shows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ChannelChoice {
    /// Longitudinal resistance R_xx, Ω.
    Rxx,
    /// Hall resistance R_xy, Ω.
    Rxy,
    /// σ_xx, S, from the resistances of a square sample (W/L = 1).
    SigmaXx,
    /// σ_xy, S, from the resistances of a square sample (W/L = 1).
    SigmaXy,
    /// dR_xx/dn, Ω m².
    DrxxDn,
    /// dσ_xy/dn, S m², square sample.
    DsxyDn,
}

impl ChannelChoice {
    /// Every channel in the order the viewer cycles through them.
    #[allow(dead_code)] // documents the cycling order; used by tests and docs
    pub const ALL: [ChannelChoice; 6] = [
        ChannelChoice::Rxx,
        ChannelChoice::Rxy,
        ChannelChoice::SigmaXx,
        ChannelChoice::SigmaXy,
        ChannelChoice::DrxxDn,
        ChannelChoice::DsxyDn,
    ];

    /// Label with display unit (markup), and the factor SI value × factor = display value.
    pub fn label(self) -> (&'static str, f64) {
        match self {
            ChannelChoice::Rxx => ("R_{xx} (kΩ)", 1e-3),
            ChannelChoice::Rxy => ("R_{xy} (kΩ)", 1e-3),
            ChannelChoice::SigmaXx => ("σ_{xx} (e^2/h)", 1.0 / E2_OVER_H),
            ChannelChoice::SigmaXy => ("σ_{xy} (e^2/h)", 1.0 / E2_OVER_H),
            ChannelChoice::DrxxDn => ("dR_{xx}/dn (Ω cm^2)", 1e4),
            ChannelChoice::DsxyDn => ("dσ_{xy}/dn (e^2/h cm^2)", 1e4 / E2_OVER_H),
        }
    }

    /// Short plain name for the status line and project file.
    pub fn short(self) -> &'static str {
        match self {
            ChannelChoice::Rxx => "Rxx",
            ChannelChoice::Rxy => "Rxy",
            ChannelChoice::SigmaXx => "σxx",
            ChannelChoice::SigmaXy => "σxy",
            ChannelChoice::DrxxDn => "dRxx/dn",
            ChannelChoice::DsxyDn => "dσxy/dn",
        }
    }

    /// True for signed quantities (a diverging palette and symmetric scale suit them).
    pub fn signed(self) -> bool {
        !matches!(self, ChannelChoice::Rxx | ChannelChoice::SigmaXx)
    }
}

/// One channel ready to draw: values on the map grid and their pyramid.
#[derive(Debug)]
pub struct ChannelData {
    /// Which quantity.
    pub choice: ChannelChoice,
    /// Level-of-detail pyramid; level 0 is the map's own grid (SI values).
    pub pyramid: Pyramid,
}

/// Everything the viewer needs about one data set.
#[derive(Debug)]
pub struct ViewData {
    /// The map as loaded (x = gate V, y = field T).
    pub map: Map,
    /// The data file, if the map came from one.
    pub source: Option<PathBuf>,
    /// FNV-1a 64-bit checksum of the data file's bytes, hex (empty without a file).
    pub checksum: String,
    /// Gate model n = α (V_g − V_CNP).
    pub gate: SingleGate,
    /// Density of one carrier per moiré cell, m⁻², if the device has one.
    pub n0_m2: Option<f64>,
    /// The stack assumed for indexing.
    pub stack: Stack,
    /// The channels available, in [`ChannelChoice::ALL`] order.
    pub channels: Vec<ChannelData>,
    /// R_xx minima for snapping.
    pub features: FeatureIndex,
    /// States found by the indexer, strongest first.
    pub states: Vec<IndexedState>,
    /// σ_xy in e²/h on the map grid (sign so that it grows with n), for Hall checks.
    pub sigma_xy_e2h: Option<Array2<f64>>,
    /// What the calibration noticed about the data (for the user; empty without indexing).
    pub notes: Vec<String>,
}

/// FNV-1a 64-bit hash of `bytes` as 16 hex digits (detects a changed data file).
pub fn fnv1a_hex(bytes: &[u8]) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    format!("{h:016x}")
}

/// Median of the finite values (NaN when there are none).
pub fn median(mut v: Vec<f64>) -> f64 {
    v.retain(|x| x.is_finite());
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    let m = v.len() / 2;
    if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    }
}

/// Options for building the view data.
#[derive(Clone, Debug)]
pub struct BuildOptions {
    /// Stack assumed when indexing.
    pub stack: Stack,
    /// Run the indexer (calibration, states); without it the gate model is `fallback_gate`.
    pub index: bool,
    /// Gate model used when the indexer is off or fails.
    pub fallback_gate: SingleGate,
    /// Moiré density used when the indexer is off, m⁻².
    pub fallback_n0_m2: Option<f64>,
    /// Compute derived channels only when the map has at most this many points.
    pub derived_max_points: usize,
}

impl BuildOptions {
    /// Index with `stack`, derived channels up to 2·10⁷ points.
    pub fn new(stack: Stack) -> BuildOptions {
        BuildOptions {
            stack,
            index: true,
            fallback_gate: SingleGate {
                alpha_m2_per_v: 1e15,
                v_cnp: 0.0,
            },
            fallback_n0_m2: None,
            derived_max_points: 20_000_000,
        }
    }
}

impl ViewData {
    /// Build the view data of `map` (x = gate, y = field, channel `rxx` at least).
    pub fn build(
        map: Map,
        source: Option<PathBuf>,
        checksum: String,
        opts: &BuildOptions,
    ) -> Result<ViewData> {
        let rxx = map.require(ChannelKind::Rxx)?.data.clone();
        let (mut gate, mut n0, mut states) = (opts.fallback_gate, opts.fallback_n0_m2, Vec::new());
        let mut notes = Vec::new();
        if opts.index {
            if let Ok(rep) = index_map(&map, &IndexOptions::new(opts.stack)) {
                gate = rep.calibration.gate();
                n0 = rep.moire.map(|m| m.n0_cm2 * 1e4).or(n0);
                states = rep.states;
                notes = rep.calibration.notes;
            }
        }
        let mut channels = vec![ChannelData {
            choice: ChannelChoice::Rxx,
            pyramid: Pyramid::new(rxx),
        }];
        let points = map.shape().0 * map.shape().1;
        let rxy = map.channel_of(ChannelKind::Rxy).map(|c| c.data.clone());
        if let Some(rxy) = &rxy {
            channels.push(ChannelData {
                choice: ChannelChoice::Rxy,
                pyramid: Pyramid::new(rxy.clone()),
            });
        }
        if points <= opts.derived_max_points {
            // One square (W = L): σ in the units of the sheet conductance of a square sample.
            let d = DeriveOptions {
                gate: Some(gate),
                geometry: Some(SampleGeometry::Squares(1.0)),
                ..DeriveOptions::default()
            };
            for (choice, q) in [
                (ChannelChoice::SigmaXx, DerivedQuantity::Sxx),
                (ChannelChoice::SigmaXy, DerivedQuantity::Sxy),
                (ChannelChoice::DrxxDn, DerivedQuantity::DrxxDn),
                (ChannelChoice::DsxyDn, DerivedQuantity::DsxyDn),
            ] {
                if let Ok(c) = derive(&map, q, &d) {
                    channels.push(ChannelData {
                        choice,
                        pyramid: Pyramid::new(c.data),
                    });
                }
            }
        }
        let minima = match gap_map(&map, &GapMapOptions::default()) {
            Ok(g) => find_minima(&map, &g, 3.0),
            Err(_) => Vec::new(),
        };
        let span_v = (map.x().max() - map.x().min()).abs().max(1e-12);
        let span_t = (map.y().max() - map.y().min()).abs().max(1e-12);
        let features = FeatureIndex::new(minima, span_v, span_t)?;
        // σ_xy ≈ 1/R_xy on a plateau (R_xx → 0), in e²/h = R_K/R_xy; sign so it grows with n.
        let sigma_xy_e2h = rxy.map(|r| {
            let sign = if gate.alpha_m2_per_v >= 0.0 {
                1.0
            } else {
                -1.0
            };
            let mut s = r.mapv(|v| VON_KLITZING_R_K / v);
            // Orient with the density: σ_xy and n share a sign on the electron side.
            let x = map.x().values();
            let hi_col = if gate.density(x[x.len() - 1]) > gate.density(x[0]) {
                x.len() - 1
            } else {
                0
            };
            let probe = median(s.column(hi_col).to_vec());
            if probe.is_finite() && probe * sign < 0.0 {
                s.mapv_inplace(|v| -v);
            }
            s
        });
        Ok(ViewData {
            map,
            source,
            checksum,
            gate,
            n0_m2: n0,
            stack: opts.stack,
            channels,
            features,
            states,
            sigma_xy_e2h,
            notes,
        })
    }

    /// The channel data of `choice`, if available.
    pub fn channel(&self, choice: ChannelChoice) -> Option<&ChannelData> {
        self.channels.iter().find(|c| c.choice == choice)
    }

    /// Value of `choice` at (gate V, field T) by bilinear interpolation on the map grid.
    pub fn value_at(&self, choice: ChannelChoice, gate_v: f64, field_t: f64) -> Option<f64> {
        let c = self.channel(choice)?;
        let fx = self.map.x().fractional_index(gate_v)?;
        let fy = self.map.y().fractional_index(field_t)?;
        let v = bilinear(&c.pyramid.levels[0].values, fx, fy);
        v.is_finite().then_some(v)
    }

    /// The Hall check of line (t, s): median σ_xy (e²/h) where the line crosses the map between
    /// fields `b_lo`…`b_hi` T, compared with t (agreement within 15 % of max(|t|, 1)).
    pub fn hall_check(&self, t: Rational, s: Rational, b_lo: f64, b_hi: f64) -> Option<HallCheck> {
        let sxy = self.sigma_xy_e2h.as_ref()?;
        let b = self.map.y().values();
        let vals: Vec<f64> = (0..b.len())
            .filter(|&r| b[r] >= b_lo.min(b_hi) && b[r] <= b_lo.max(b_hi))
            .filter_map(|r| {
                let n = t.to_f64() * E_OVER_H * b[r] + s.to_f64() * self.n0_m2.unwrap_or(0.0);
                let f = self
                    .map
                    .x()
                    .fractional_index(self.gate.gate_for_density(n))?;
                let v = sxy[[r, f.round() as usize]];
                v.is_finite().then_some(v)
            })
            .collect();
        let m = median(vals);
        let expected = t.to_f64();
        let verdict = if !m.is_finite() {
            "no_plateau"
        } else if (m - expected).abs() <= 0.15 * expected.abs().max(1.0) {
            "agrees"
        } else {
            "contradicts"
        };
        Some(HallCheck {
            sigma_xy_e2h: m,
            expected_e2h: expected,
            verdict: verdict.into(),
            // This quick check uses the median along the line, not plateau runs.
            plateau_rows: 0,
        })
    }
}

/// Bilinear interpolation of `a` at fractional (column, row) index; NaN outside.
pub fn bilinear(a: &Array2<f64>, fx: f64, fy: f64) -> f64 {
    let (ny, nx) = a.dim();
    if !(fx >= 0.0 && fy >= 0.0) || fx > (nx - 1) as f64 || fy > (ny - 1) as f64 {
        return f64::NAN;
    }
    let (i0, j0) = (fy.floor() as usize, fx.floor() as usize);
    let (i1, j1) = ((i0 + 1).min(ny - 1), (j0 + 1).min(nx - 1));
    let (ty, tx) = (fy - i0 as f64, fx - j0 as f64);
    let v00 = a[[i0, j0]];
    let v01 = a[[i0, j1]];
    let v10 = a[[i1, j0]];
    let v11 = a[[i1, j1]];
    let top = v00 + (v01 - v00) * tx;
    let bot = v10 + (v11 - v10) * tx;
    top + (bot - top) * ty
}
