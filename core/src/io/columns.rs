//! Recognising what a column (or array key) holds from its header text, with its unit:
//! `vg_V`, `Vg (mV)`, `B [T]`, `rxy_kohm`, `R_xx`, `n_cm2`, `T_K`… (case-insensitive names).

use crate::error::{Error, Result};
use crate::map::{ChannelKind, Quantity};
use crate::units::{parse_unit, Dimension, Unit};
use serde::{Deserialize, Serialize};

/// The role a column plays in a map.
#[derive(Debug, Clone, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Role {
    /// Single gate voltage.
    Gate,
    /// Top-gate voltage.
    TopGate,
    /// Bottom-gate voltage.
    BottomGate,
    /// Magnetic field.
    Field,
    /// Carrier density given directly.
    Density,
    /// Sample temperature.
    Temperature,
    /// R_xx.
    Rxx,
    /// R_xy.
    Rxy,
    /// σ_xx.
    SigmaXx,
    /// σ_xy.
    SigmaXy,
    /// Any other numeric column, kept as a channel under its own name.
    Other(String),
}

impl Role {
    /// The names accepted in `--columns role=header`.
    pub const OPTION_NAMES: &'static str =
        "gate, top_gate, bottom_gate, field, density, temperature, rxx, rxy, sxx, sxy";

    /// Parse a role name as written in a `--columns` option.
    pub fn from_option_name(s: &str) -> Option<Role> {
        Some(match s.trim().to_ascii_lowercase().as_str() {
            "gate" | "vg" => Role::Gate,
            "top_gate" | "top" | "vt" => Role::TopGate,
            "bottom_gate" | "bottom" | "vb" => Role::BottomGate,
            "field" | "b" => Role::Field,
            "density" | "n" => Role::Density,
            "temperature" | "t" => Role::Temperature,
            "rxx" => Role::Rxx,
            "rxy" => Role::Rxy,
            "sxx" | "sigma_xx" => Role::SigmaXx,
            "sxy" | "sigma_xy" => Role::SigmaXy,
            _ => return None,
        })
    }
    /// Short name used in reports and the column mapping.
    pub fn name(&self) -> String {
        match self {
            Role::Gate => "gate".into(),
            Role::TopGate => "top_gate".into(),
            Role::BottomGate => "bottom_gate".into(),
            Role::Field => "field".into(),
            Role::Density => "density".into(),
            Role::Temperature => "temperature".into(),
            Role::Rxx => "rxx".into(),
            Role::Rxy => "rxy".into(),
            Role::SigmaXx => "sxx".into(),
            Role::SigmaXy => "sxy".into(),
            Role::Other(s) => s.clone(),
        }
    }
    /// The dimension a value in this role must have.
    pub fn dimension(&self) -> Option<Dimension> {
        Some(match self {
            Role::Gate | Role::TopGate | Role::BottomGate => Dimension::Voltage,
            Role::Field => Dimension::Field,
            Role::Density => Dimension::Density,
            Role::Temperature => Dimension::Temperature,
            Role::Rxx | Role::Rxy => Dimension::Resistance,
            Role::SigmaXx | Role::SigmaXy => Dimension::Conductance,
            Role::Other(_) => return None,
        })
    }
    /// The SI unit assumed when a header gives none (V, T, Ω, S, K; cm⁻² for density, the
    /// unit densities are quoted in).
    pub fn default_unit(&self) -> Unit {
        let (dimension, to_si) = match self {
            Role::Density => (Dimension::Density, 1e4),
            other => (other.dimension().unwrap_or(Dimension::Dimensionless), 1.0),
        };
        Unit { dimension, to_si }
    }
    /// True for the coordinate roles (gates, field, density, temperature).
    pub fn is_coordinate(&self) -> bool {
        matches!(
            self,
            Role::Gate
                | Role::TopGate
                | Role::BottomGate
                | Role::Field
                | Role::Density
                | Role::Temperature
        )
    }
    /// The axis quantity of a coordinate role.
    pub fn quantity(&self) -> Option<Quantity> {
        Some(match self {
            Role::Gate => Quantity::Gate,
            Role::TopGate => Quantity::TopGate,
            Role::BottomGate => Quantity::BottomGate,
            Role::Field => Quantity::Field,
            Role::Density => Quantity::Density,
            Role::Temperature => Quantity::Temperature,
            _ => return None,
        })
    }
    /// The channel kind of a data role.
    pub fn channel_kind(&self) -> ChannelKind {
        match self {
            Role::Rxx => ChannelKind::Rxx,
            Role::Rxy => ChannelKind::Rxy,
            Role::SigmaXx => ChannelKind::SigmaXx,
            Role::SigmaXy => ChannelKind::SigmaXy,
            _ => ChannelKind::Other,
        }
    }
}

/// Split a header into its name and unit text: `vg_V` → (`vg`, `V`), `Vg (mV)` → (`Vg`, `mV`),
/// `B [T]` → (`B`, `T`), `rxy_kohm` → (`rxy`, `kohm`), `R_xx` → (`R_xx`, ``).
pub fn split_name_unit(header: &str) -> (String, String) {
    let h = header.trim().trim_matches('"').trim();
    for (open, close) in [('(', ')'), ('[', ']'), ('{', '}')] {
        if let (Some(i), true) = (h.rfind(open), h.ends_with(close)) {
            return (
                h[..i].trim().to_string(),
                h[i + 1..h.len() - 1].trim().to_string(),
            );
        }
    }
    if let Some(i) = h.rfind(['_', ' ', '/']) {
        let (name, unit) = (&h[..i], &h[i + 1..]);
        if parse_unit(unit).is_some() && !name.is_empty() {
            return (name.trim().to_string(), unit.to_string());
        }
    }
    (h.to_string(), String::new())
}

/// The role of a column name (without unit), by the usual spellings; `None` if unknown.
pub fn role_of_name(name: &str) -> Option<Role> {
    let key: String = name
        .to_lowercase()
        .chars()
        .filter(|c| !matches!(c, '_' | '-' | ' ' | '.'))
        .collect();
    Some(match key.as_str() {
        "vg" | "gate" | "vgate" | "gatevoltage" | "vbg" | "backgate" | "vbackgate" => Role::Gate,
        "vt" | "vtg" | "topgate" | "vtop" | "vtopgate" => Role::TopGate,
        "vb" | "vbottom" | "bottomgate" | "vbottomgate" => Role::BottomGate,
        "b" | "field" | "bfield" | "magneticfield" | "bz" => Role::Field,
        "n" | "density" | "ncarrier" | "carrierdensity" => Role::Density,
        "temp" | "temperature" | "tsample" => Role::Temperature,
        "rxx" | "rlong" | "rlongitudinal" => Role::Rxx,
        "rxy" | "rhall" | "ryx" => Role::Rxy,
        "sxx" | "sigmaxx" | "σxx" | "gxx" => Role::SigmaXx,
        "sxy" | "sigmaxy" | "σxy" | "gxy" => Role::SigmaXy,
        _ => return None,
    })
}

/// What a header is: its role and the unit converting its values to SI.
#[derive(Debug, Clone, PartialEq)]
pub struct Recognised {
    /// Role of the column.
    pub role: Role,
    /// Unit of the values in the file.
    pub unit: Unit,
}

/// Recognise a header: its role by name and its unit from the suffix. `T` alone is a
/// temperature only when its unit says kelvin (`T_K`); an unknown name becomes `Role::Other`.
/// Errors if the unit does not fit the role (e.g. `rxx_V`).
pub fn recognise(header: &str) -> Result<Recognised> {
    let (name, unit_text) = split_name_unit(header);
    let unit = if unit_text.is_empty() {
        None
    } else {
        parse_unit(&unit_text)
    };
    let role = match role_of_name(&name) {
        Some(r) => r,
        None if name.eq_ignore_ascii_case("t")
            && unit.map(|u| u.dimension) == Some(Dimension::Temperature) =>
        {
            Role::Temperature
        }
        None => Role::Other(header.trim().to_string()),
    };
    let unit = match (unit, role.dimension()) {
        (Some(u), Some(d)) if u.dimension != d => {
            return Err(Error::invalid(
                format!("column `{header}`"),
                format!(
                    "unit `{unit_text}` measures {:?}, but a {} column needs {:?}",
                    u.dimension,
                    role.name(),
                    d
                ),
            ))
        }
        (Some(u), _) => u,
        (None, _) => role.default_unit(),
    };
    Ok(Recognised { role, unit })
}

/// Parse an explicit mapping `gate=vg_V,field=b_T,rxx=R1` into (role, header) pairs.
pub fn parse_mapping(text: &str) -> Result<Vec<(Role, String)>> {
    let mut out = Vec::new();
    for part in text.split(',').filter(|p| !p.trim().is_empty()) {
        let (role, header) = part.split_once('=').ok_or_else(|| {
            Error::invalid(
                "column mapping",
                format!(
                    "`{part}` is not role=header (roles: {})",
                    Role::OPTION_NAMES
                ),
            )
        })?;
        let role = Role::from_option_name(role).ok_or_else(|| {
            Error::invalid(
                "column mapping",
                format!("unknown role `{role}` (roles: {})", Role::OPTION_NAMES),
            )
        })?;
        out.push((role, header.trim().to_string()));
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn headers_with_units() {
        let r = recognise("vg_V").unwrap();
        assert_eq!(r.role, Role::Gate);
        assert_eq!(r.unit.to_si, 1.0);
        let r = recognise("Vg (mV)").unwrap();
        assert_eq!((r.role, r.unit.to_si), (Role::Gate, 1e-3));
        let r = recognise("B [mT]").unwrap();
        assert_eq!((r.role, r.unit.to_si), (Role::Field, 1e-3));
        let r = recognise("rxy_kohm").unwrap();
        assert_eq!((r.role, r.unit.to_si), (Role::Rxy, 1e3));
        let r = recognise("R_xx").unwrap();
        assert_eq!((r.role, r.unit.to_si), (Role::Rxx, 1.0));
        let r = recognise("n_cm2").unwrap();
        assert_eq!((r.role, r.unit.to_si), (Role::Density, 1e4));
        let r = recognise("T_K").unwrap();
        assert_eq!(r.role, Role::Temperature);
        let r = recognise("FIELD").unwrap();
        assert_eq!(r.role, Role::Field);
        let r = recognise("V_g").unwrap();
        assert_eq!(r.role, Role::Gate);
        let r = recognise("Rxx (MΩ)").unwrap();
        assert_eq!(r.unit.to_si, 1e6);
        let r = recognise("lockin_phase").unwrap();
        assert_eq!(r.role, Role::Other("lockin_phase".into()));
    }

    #[test]
    fn unit_must_fit_role() {
        let e = recognise("rxx_V").unwrap_err().to_string();
        assert!(e.contains("rxx_V"), "{e}");
    }

    #[test]
    fn explicit_mapping() {
        let m = parse_mapping("gate=V1, field=B_magnet,rxx=R_4pt").unwrap();
        assert_eq!(m[0], (Role::Gate, "V1".to_string()));
        assert_eq!(m[2], (Role::Rxx, "R_4pt".to_string()));
        assert!(parse_mapping("gate").is_err());
        assert!(parse_mapping("colour=x").is_err());
    }
}
