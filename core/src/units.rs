//! Conversions between the units shown at the edges (cm⁻², 10¹² cm⁻², V/nm, meV, K) and SI inside,
//! and parsing of unit suffixes found in file headers (`vg_mV`, `rxy_kohm`, `b (mT)`).

use crate::constants::{BOLTZMANN_K, E2_OVER_H, ELEMENTARY_CHARGE};

/// Square centimetres per square metre: a density in cm⁻² times this is in m⁻².
pub const M2_PER_CM2: f64 = 1.0e4;
/// A density of 10¹² cm⁻² expressed in m⁻².
pub const N_1E12_CM2_IN_M2: f64 = 1.0e16;

/// Density n from cm⁻² to m⁻².
pub fn cm2_to_m2(n_cm2: f64) -> f64 {
    n_cm2 * M2_PER_CM2
}
/// Density n from m⁻² to cm⁻².
pub fn m2_to_cm2(n_m2: f64) -> f64 {
    n_m2 / M2_PER_CM2
}
/// Field-like quantity (e.g. D/ε₀) from V/nm to V/m.
pub fn v_per_nm_to_v_per_m(x: f64) -> f64 {
    x * 1.0e9
}
/// Field-like quantity (e.g. D/ε₀) from V/m to V/nm.
pub fn v_per_m_to_v_per_nm(x: f64) -> f64 {
    x * 1.0e-9
}
/// Energy from meV to J.
pub fn mev_to_joule(e_mev: f64) -> f64 {
    e_mev * 1.0e-3 * ELEMENTARY_CHARGE
}
/// Energy from J to meV.
pub fn joule_to_mev(e_j: f64) -> f64 {
    e_j / (1.0e-3 * ELEMENTARY_CHARGE)
}
/// Energy in meV expressed as a temperature E/k_B in K (1 meV ≙ 11.6045 K).
pub fn mev_to_kelvin(e_mev: f64) -> f64 {
    mev_to_joule(e_mev) / BOLTZMANN_K
}
/// Temperature-equivalent energy k_B T (T in K) in meV.
pub fn kelvin_to_mev(t_k: f64) -> f64 {
    joule_to_mev(t_k * BOLTZMANN_K)
}

/// The SI quantity a unit measures; a header unit is accepted only where its dimension fits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum Dimension {
    /// Electric potential, V.
    Voltage,
    /// Magnetic flux density, T.
    Field,
    /// Resistance, Ω.
    Resistance,
    /// Conductance, S.
    Conductance,
    /// Areal carrier density, m⁻².
    Density,
    /// Temperature, K.
    Temperature,
    /// Electric current, A.
    Current,
    /// Time, s.
    Time,
    /// Electric field or D/ε₀, V/m.
    ElectricField,
    /// Dimensionless (filling factor, ratios).
    Dimensionless,
}

impl Dimension {
    /// The SI unit symbol used inside the project for this dimension.
    pub fn si_symbol(self) -> &'static str {
        match self {
            Dimension::Voltage => "V",
            Dimension::Field => "T",
            Dimension::Resistance => "Ω",
            Dimension::Conductance => "S",
            Dimension::Density => "m⁻²",
            Dimension::Temperature => "K",
            Dimension::Current => "A",
            Dimension::Time => "s",
            Dimension::ElectricField => "V/m",
            Dimension::Dimensionless => "",
        }
    }
}

/// A unit recognised in a header: its dimension and the factor that takes a value to SI.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Unit {
    /// What the unit measures.
    pub dimension: Dimension,
    /// Multiply a value in this unit by `to_si` to get SI (e.g. 1e-3 for mV).
    pub to_si: f64,
}

/// Parse a unit text as written in a header, e.g. `V`, `mV`, `kohm`, `kΩ`, `MOhm`, `mT`, `G`,
/// `cm2`, `cm^-2`, `1e12cm-2`, `K`, `mK`, `uS`, `e2h`. Returns `None` if the text is not a unit
/// this project knows. Prefix case matters where it must (`mohm` is milliohm, `Mohm` megaohm).
pub fn parse_unit(text: &str) -> Option<Unit> {
    let t = text.trim();
    if t.is_empty() {
        return None;
    }
    let lower = t.to_ascii_lowercase().replace(['^', ' ', '·'], "");
    // Densities first: they carry digits and minus signs.
    let density = |s: &str| -> Option<f64> {
        let s = s.replace("⁻²", "-2").replace('²', "2");
        let (scale, rest) = match s.find("cm") {
            Some(i) => {
                let head = &s[..i];
                let scale = if head.is_empty() {
                    1.0
                } else {
                    head.parse::<f64>().ok()?
                };
                (scale * M2_PER_CM2, &s[i + 2..])
            }
            None => {
                let i = s.find('m')?;
                let head = &s[..i];
                let scale = if head.is_empty() {
                    1.0
                } else {
                    head.parse::<f64>().ok()?
                };
                (scale, &s[i + 1..])
            }
        };
        matches!(rest, "2" | "-2").then_some(scale)
    };
    if let Some(f) = density(&lower) {
        return Some(Unit {
            dimension: Dimension::Density,
            to_si: f,
        });
    }
    let unit = |dimension, to_si| Some(Unit { dimension, to_si });
    // Resistance: keep case for the m/M prefix.
    for (suffix, is_ohm) in [("ohm", true), ("ohms", true), ("Ω", true), ("ω", true)] {
        let tl = t.to_lowercase();
        if tl.ends_with(suffix) && is_ohm {
            let head: String = t
                .chars()
                .take(t.chars().count() - suffix.chars().count())
                .collect();
            let f = match head.as_str() {
                "" => 1.0,
                "m" => 1e-3,
                "k" | "K" => 1e3,
                "M" => 1e6,
                "G" => 1e9,
                _ => return None,
            };
            return unit(Dimension::Resistance, f);
        }
    }
    match lower.as_str() {
        "e2h" | "e2/h" | "e^2/h" => return unit(Dimension::Conductance, E2_OVER_H),
        "v/nm" => return unit(Dimension::ElectricField, 1e9),
        "v/m" => return unit(Dimension::ElectricField, 1.0),
        "" | "1" | "none" => return unit(Dimension::Dimensionless, 1.0),
        _ => {}
    }
    // Single-letter base units with SI prefixes; the prefix keeps its case.
    let (head, base) = t.split_at(t.len() - t.chars().last()?.len_utf8());
    let dim = match base {
        "V" | "v" => Dimension::Voltage,
        "T" => Dimension::Field,
        "G" if head.is_empty() || head == "k" => {
            return unit(Dimension::Field, if head == "k" { 0.1 } else { 1e-4 });
        }
        "S" => Dimension::Conductance,
        "K" => Dimension::Temperature,
        "A" => Dimension::Current,
        "s" => Dimension::Time,
        _ => return None,
    };
    let f = match head {
        "" => 1.0,
        "m" => 1e-3,
        "u" | "µ" | "μ" => 1e-6,
        "n" => 1e-9,
        "p" => 1e-12,
        "k" => 1e3,
        "M" if dim != Dimension::Field => 1e6,
        _ => return None,
    };
    unit(dim, f)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn si(t: &str) -> (Dimension, f64) {
        let u = parse_unit(t).unwrap_or_else(|| panic!("unit {t} not parsed"));
        (u.dimension, u.to_si)
    }

    #[test]
    fn prefixes_convert_to_si() {
        assert_eq!(si("V"), (Dimension::Voltage, 1.0));
        assert_eq!(si("mV"), (Dimension::Voltage, 1e-3));
        assert_eq!(si("T"), (Dimension::Field, 1.0));
        assert_eq!(si("mT"), (Dimension::Field, 1e-3));
        // 1 G = 1e-4 T (definition of the gauss).
        assert_eq!(si("G"), (Dimension::Field, 1e-4));
        assert_eq!(si("ohm"), (Dimension::Resistance, 1.0));
        assert_eq!(si("kohm"), (Dimension::Resistance, 1e3));
        assert_eq!(si("kΩ"), (Dimension::Resistance, 1e3));
        assert_eq!(si("MOhm"), (Dimension::Resistance, 1e6));
        assert_eq!(si("Mohm"), (Dimension::Resistance, 1e6));
        assert_eq!(si("mohm"), (Dimension::Resistance, 1e-3));
        assert_eq!(si("uS"), (Dimension::Conductance, 1e-6));
        assert_eq!(si("K"), (Dimension::Temperature, 1.0));
        assert_eq!(si("mK"), (Dimension::Temperature, 1e-3));
        assert_eq!(si("nA"), (Dimension::Current, 1e-9));
        assert_eq!(si("V/nm"), (Dimension::ElectricField, 1e9));
    }

    #[test]
    fn densities_in_many_spellings() {
        for t in ["cm2", "cm-2", "cm^-2", "cm⁻²"] {
            assert_eq!(si(t), (Dimension::Density, 1e4), "{t}");
        }
        assert_eq!(si("m2"), (Dimension::Density, 1.0));
        let (d, f) = si("1e12cm-2");
        assert_eq!(d, Dimension::Density);
        assert!((f - 1e16).abs() < 1.0);
    }

    #[test]
    fn unknown_units_are_refused() {
        for t in ["furlong", "Vx", "zT", "MT"] {
            assert!(parse_unit(t).is_none(), "{t}");
        }
    }

    #[test]
    fn energy_conversions() {
        // 1 meV ≙ 11.604 518 K (check-values §1, derived from exact e and k_B).
        assert!((mev_to_kelvin(1.0) - 11.604_518).abs() < 1e-5);
        assert!((kelvin_to_mev(11.604_518) - 1.0).abs() < 1e-6);
        assert_eq!(cm2_to_m2(1e12), 1e16);
        assert_eq!(m2_to_cm2(1e16), 1e12);
    }
}
