//! `fanmark lines`: print the predicted lines (t, s) and Brown–Zak fields of a described device,
//! as an aligned table or as JSON, with densities (and gate voltages) at chosen fields.

use anyhow::{bail, Context, Result};
use fanmark_core::families::{
    generate, BrokenSymmetrySpec, BrownZakSpec, CompositeFermionSpec, FamilySpec, IntegerSpec,
    LandauSequence, SatelliteSpec, WannierSpec,
};
use fanmark_core::gate::SingleGate;
use fanmark_core::line::{Line, LineShape};
use fanmark_core::moire::Moire;
use fanmark_core::units::{cm2_to_m2, m2_to_cm2};
use fanmark_core::Rational;
use serde_json::{json, Value};
use std::io::Write;

/// Device stacks `lines` knows.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum Stack {
    /// Monolayer graphene: ν = 4(N+½).
    Mono,
    /// Bernal bilayer graphene: ν = 4N.
    Bilayer,
    /// Twisted bilayer graphene (moiré; needs --twist-deg or --n0-cm2).
    Tbg,
    /// Graphene aligned to hBN (moiré; --twist-deg, default 0 = aligned, or --n0-cm2).
    Hbn,
}

/// Line families that can be selected.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum FamilyChoice {
    /// Degenerate integer Landau-level sequence.
    Integer,
    /// Symmetry-broken integers.
    Broken,
    /// Composite-fermion fractions.
    Cf,
    /// Wannier (t, s) lines.
    Wannier,
    /// Satellite fans from s = ±4 (see --satellite-centres).
    Satellite,
    /// Brown–Zak fields φ/φ₀ = p/q.
    BrownZak,
}

/// Arguments of `fanmark lines`.
#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    /// Device stack.
    #[arg(long, value_enum)]
    pub stack: Stack,
    /// Twist angle in degrees (tbg, hbn).
    #[arg(long)]
    pub twist_deg: Option<f64>,
    /// Density of one carrier per moiré cell n₀ = 1/A in cm⁻² (instead of --twist-deg).
    #[arg(long)]
    pub n0_cm2: Option<f64>,
    /// Device, gate and family bounds.
    #[command(flatten)]
    pub opt: Box<Options>,
    /// Field in T at which to give each line's density (repeatable).
    #[arg(long = "at-b")]
    pub at_b: Vec<f64>,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Device, gate and family-bound options of `fanmark lines`.
#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Options {
    /// Graphene lattice constant in nm.
    #[arg(long, default_value_t = 0.246)]
    pub lattice_nm: f64,
    /// Graphene/hBN lattice mismatch δ in percent.
    #[arg(long, default_value_t = 1.8)]
    pub mismatch_percent: f64,
    /// Gate lever arm α in cm⁻² V⁻¹ (adds V_g to every output point).
    #[arg(long)]
    pub alpha_cm2_per_v: Option<f64>,
    /// Gate voltage of charge neutrality in V.
    #[arg(long, default_value_t = 0.0)]
    pub v_cnp: f64,
    /// Families to list (comma separated). Default: integer,broken,cf for mono and bilayer;
    /// integer,satellite,wannier,brown-zak for moiré stacks.
    #[arg(long, value_enum, value_delimiter = ',')]
    pub families: Option<Vec<FamilyChoice>>,
    /// Landau-level degeneracy g, overriding the stack's sequence.
    #[arg(long)]
    pub degeneracy: Option<u32>,
    /// Landau-level index offset (e.g. 1/2), overriding the stack's sequence.
    #[arg(long)]
    pub offset: Option<String>,
    /// Largest |ν| of the integer and broken-symmetry families.
    #[arg(long, default_value_t = 12)]
    pub nu_max: i64,
    /// Largest denominator of s (Wannier) and of q (Brown–Zak fields).
    #[arg(long, default_value_t = 1)]
    pub q_max: i64,
    /// Largest |t| of Wannier and satellite lines.
    #[arg(long, default_value_t = 4)]
    pub t_max: i64,
    /// Largest denominator of t (fractional Chern insulators when > 1).
    #[arg(long, default_value_t = 1)]
    pub t_den_max: i64,
    /// Largest |s| of Wannier lines (carriers per moiré cell, e.g. 4 or 9/2).
    #[arg(long, default_value = "4")]
    pub s_max: String,
    /// Largest p of composite-fermion sequences.
    #[arg(long, default_value_t = 4)]
    pub cf_p_max: i64,
    /// Smallest ν₀ of composite-fermion sequences.
    #[arg(long, default_value_t = -2)]
    pub cf_nu0_min: i64,
    /// Largest ν₀ of composite-fermion sequences.
    #[arg(long, default_value_t = 1)]
    pub cf_nu0_max: i64,
    /// Include the four-flux sequences ν₀ + p/(4p±1).
    #[arg(long)]
    pub cf_four_flux: bool,
    /// Centres s of the satellite fans (comma separated).
    #[arg(long, value_delimiter = ',', default_value = "-4,4")]
    pub satellite_centres: Vec<String>,
    /// Largest field of Brown–Zak lines in T.
    #[arg(long, default_value_t = 30.0)]
    pub b_max_t: f64,
}

fn parse_rational(what: &str, text: &str) -> Result<Rational> {
    text.parse::<Rational>()
        .with_context(|| format!("{what}: `{text}` is not a fraction p/q"))
}

/// The moiré cell described by the options, if the stack has one.
fn moire_of(a: &Args) -> Result<Option<(Moire, Option<f64>)>> {
    let lattice = a.opt.lattice_nm * 1e-9;
    if !(lattice.is_finite() && lattice > 0.0) {
        bail!(
            "--lattice-nm {}: expected a positive length",
            a.opt.lattice_nm
        );
    }
    let moire_stack = matches!(a.stack, Stack::Tbg | Stack::Hbn);
    if !moire_stack {
        if a.twist_deg.is_some() || a.n0_cm2.is_some() {
            bail!("--twist-deg and --n0-cm2 describe a moiré cell; use --stack tbg or --stack hbn");
        }
        return Ok(None);
    }
    if a.twist_deg.is_some() && a.n0_cm2.is_some() {
        bail!("give either --twist-deg or --n0-cm2, not both");
    }
    if let Some(n0) = a.n0_cm2 {
        let m = Moire::from_n0(cm2_to_m2(n0)).context("--n0-cm2")?;
        return Ok(Some((m, None)));
    }
    let twist = match (a.stack, a.twist_deg) {
        (Stack::Tbg, None) => {
            bail!("--stack tbg needs the moiré cell: give --twist-deg (degrees) or --n0-cm2")
        }
        (_, None) => 0.0,
        (_, Some(t)) => t,
    };
    let m = match a.stack {
        Stack::Tbg => Moire::twisted_bilayer(twist, lattice),
        _ => Moire::graphene_hbn(twist, lattice, a.opt.mismatch_percent / 100.0),
    }
    .context("--twist-deg")?;
    Ok(Some((m, Some(twist))))
}

fn spec_of(a: &Args, has_moire: bool) -> Result<FamilySpec> {
    let mut landau = match a.stack {
        Stack::Mono | Stack::Hbn => LandauSequence::monolayer(),
        Stack::Bilayer | Stack::Tbg => LandauSequence::bilayer(),
    };
    if let Some(g) = a.opt.degeneracy {
        landau = LandauSequence::general(g, landau.offset).context("--degeneracy")?;
    }
    if let Some(o) = &a.opt.offset {
        landau.offset = parse_rational("--offset", o)?;
    }
    let chosen = a.opt.families.clone().unwrap_or_else(|| {
        if has_moire {
            vec![
                FamilyChoice::Integer,
                FamilyChoice::Satellite,
                FamilyChoice::Wannier,
                FamilyChoice::BrownZak,
            ]
        } else {
            vec![
                FamilyChoice::Integer,
                FamilyChoice::Broken,
                FamilyChoice::Cf,
            ]
        }
    });
    for f in &chosen {
        if !has_moire
            && matches!(
                f,
                FamilyChoice::Wannier | FamilyChoice::Satellite | FamilyChoice::BrownZak
            )
        {
            bail!(
                "--families {:?} needs a moiré cell: use --stack tbg or hbn",
                f
            );
        }
    }
    let s_max = parse_rational("--s-max", &a.opt.s_max)?.abs();
    let neg = |r: Rational| Rational::ZERO.checked_sub(r).unwrap_or(r);
    let centres = a
        .opt
        .satellite_centres
        .iter()
        .map(|c| parse_rational("--satellite-centres", c))
        .collect::<Result<Vec<_>>>()?;
    let on = |f: FamilyChoice| chosen.contains(&f);
    Ok(FamilySpec {
        landau,
        integer: on(FamilyChoice::Integer).then_some(IntegerSpec {
            nu_max: a.opt.nu_max,
        }),
        broken_symmetry: on(FamilyChoice::Broken).then_some(BrokenSymmetrySpec {
            nu_max: a.opt.nu_max,
        }),
        composite_fermion: on(FamilyChoice::Cf).then_some(CompositeFermionSpec {
            nu0_min: a.opt.cf_nu0_min,
            nu0_max: a.opt.cf_nu0_max,
            p_max: a.opt.cf_p_max,
            two_flux: true,
            four_flux: a.opt.cf_four_flux,
        }),
        satellite: on(FamilyChoice::Satellite).then_some(SatelliteSpec {
            centres,
            t_max: a.opt.t_max,
        }),
        wannier: on(FamilyChoice::Wannier).then_some(WannierSpec {
            t_max: Rational::integer(a.opt.t_max),
            s_min: neg(s_max),
            s_max,
            s_den_max: a.opt.q_max,
            t_den_max: a.opt.t_den_max,
            fractional_t_needs_fractional_s: true,
        }),
        brown_zak: on(FamilyChoice::BrownZak).then_some(BrownZakSpec {
            q_max: a.opt.q_max,
            b_max_t: a.opt.b_max_t,
        }),
    })
}

fn gate_of(a: &Args) -> Result<Option<SingleGate>> {
    match a.opt.alpha_cm2_per_v {
        None => Ok(None),
        Some(al) if al.is_finite() && al != 0.0 && a.opt.v_cnp.is_finite() => {
            Ok(Some(SingleGate {
                alpha_m2_per_v: cm2_to_m2(al),
                v_cnp: a.opt.v_cnp,
            }))
        }
        Some(al) => bail!("--alpha-cm2-per-v {al}: expected a finite non-zero density per volt"),
    }
}

/// Run `fanmark lines`.
pub fn run(a: Args) -> Result<()> {
    for &b in &a.at_b {
        if !b.is_finite() {
            bail!("--at-b {b}: expected a finite field in T");
        }
    }
    let cell = moire_of(&a)?;
    let gate = gate_of(&a)?;
    let spec = spec_of(&a, cell.is_some())?;
    let moire = cell.map(|c| c.0);
    let lines = generate(&spec, moire.as_ref()).context("generating the line families")?;
    let n0 = moire.map(|m| m.n0_m2());

    let out = std::io::stdout();
    let mut w = std::io::BufWriter::new(out.lock());
    if a.json {
        let doc = json_document(&a, cell, gate, &lines, n0)?;
        serde_json::to_writer_pretty(&mut w, &doc)?;
        writeln!(w)?;
    } else {
        write_table(&mut w, &a, cell, gate, &lines, n0)?;
    }
    w.flush()?;
    Ok(())
}

fn stack_name(s: Stack) -> &'static str {
    match s {
        Stack::Mono => "mono",
        Stack::Bilayer => "bilayer",
        Stack::Tbg => "tbg",
        Stack::Hbn => "hbn",
    }
}

fn json_document(
    a: &Args,
    cell: Option<(Moire, Option<f64>)>,
    gate: Option<SingleGate>,
    lines: &[Line],
    n0: Option<f64>,
) -> Result<Value> {
    let mut device = json!({ "stack": stack_name(a.stack) });
    if let Some((m, twist)) = cell {
        device["twist_deg"] = json!(twist);
        device["lambda_nm"] = json!(m.lambda_m * 1e9);
        device["n0_cm2"] = json!(m2_to_cm2(m.n0_m2()));
        device["ns_cm2"] = json!(m2_to_cm2(m.full_filling_m2()));
        device["one_flux_field_T"] = json!(m.one_flux_field_t());
    }
    if let Some(g) = gate {
        device["gate"] = json!({
            "alpha_cm2_per_V": m2_to_cm2(g.alpha_m2_per_v),
            "v_cnp_V": g.v_cnp,
        });
    }
    let mut rows = Vec::with_capacity(lines.len());
    for l in lines {
        let mut row = json!({
            "family": l.family.name(),
            "memberships": l.memberships,
            "label": l.label,
        });
        match l.shape {
            LineShape::Gap { t, s } => {
                row["kind"] = json!("gap");
                row["t"] = json!(t.to_string());
                row["s"] = json!(s.to_string());
                row["hall_e2_per_h"] = json!(t.to_f64());
                row["hall_S"] = json!(l.hall_conductance_s());
                let mut pts = Vec::new();
                for &b in &a.at_b {
                    let n = l.density_at(b, n0)?;
                    let mut p = json!({ "b_T": b, "n_cm2": m2_to_cm2(n) });
                    if let Some(g) = gate {
                        p["vg_V"] = json!(g.gate_for_density(n));
                    }
                    pts.push(p);
                }
                row["at_b"] = Value::Array(pts);
            }
            LineShape::ConstantFlux { flux } => {
                row["kind"] = json!("constant_flux");
                row["flux_per_cell"] = json!(flux.to_string());
                row["b_T"] = json!(l.field_t(n0)?);
            }
        }
        rows.push(row);
    }
    Ok(json!({
        "device": device,
        "at_b_T": a.at_b,
        "line_count": lines.len(),
        "lines": rows,
    }))
}

fn write_table(
    w: &mut impl Write,
    a: &Args,
    cell: Option<(Moire, Option<f64>)>,
    gate: Option<SingleGate>,
    lines: &[Line],
    n0: Option<f64>,
) -> Result<()> {
    write!(w, "stack {}", stack_name(a.stack))?;
    if let Some((m, twist)) = cell {
        if let Some(t) = twist {
            write!(w, ", twist {t}°")?;
        }
        write!(
            w,
            ", λ = {:.4} nm, n₀ = {:.5}×10¹² cm⁻², n_s = {:.5}×10¹² cm⁻², φ₀/A = {:.4} T",
            m.lambda_m * 1e9,
            m2_to_cm2(m.n0_m2()) / 1e12,
            m2_to_cm2(m.full_filling_m2()) / 1e12,
            m.one_flux_field_t()
        )?;
    }
    if let Some(g) = gate {
        write!(
            w,
            ", α = {:.5e} cm⁻²/V, V_CNP = {} V",
            m2_to_cm2(g.alpha_m2_per_v),
            g.v_cnp
        )?;
    }
    writeln!(w, "; {} lines", lines.len())?;

    let mut header = vec![
        "family".to_string(),
        "t".into(),
        "s".into(),
        "label".into(),
        "σ_xy (e²/h)".into(),
        "B (T)".into(),
    ];
    for &b in &a.at_b {
        header.push(format!("n@{b}T (10¹² cm⁻²)"));
        if gate.is_some() {
            header.push(format!("V_g@{b}T (V)"));
        }
    }
    header.push("also in".into());
    let mut table = vec![header];
    for l in lines {
        let also: Vec<&str> = l
            .memberships
            .iter()
            .map(|m| m.family.name())
            .filter(|f| *f != l.family.name())
            .collect();
        let mut also_u: Vec<&str> = Vec::new();
        for f in also {
            if !also_u.contains(&f) {
                also_u.push(f);
            }
        }
        let mut row = vec![l.family.name().to_string()];
        match l.shape {
            LineShape::Gap { t, s } => {
                row.push(t.to_string());
                row.push(s.to_string());
                row.push(l.label.clone());
                row.push(format!("{:.4}", t.to_f64()));
                row.push("".into());
                for &b in &a.at_b {
                    let n = l.density_at(b, n0)?;
                    row.push(format!("{:.6}", m2_to_cm2(n) / 1e12));
                    if let Some(g) = gate {
                        row.push(format!("{:.4}", g.gate_for_density(n)));
                    }
                }
            }
            LineShape::ConstantFlux { .. } => {
                row.extend(["".into(), "".into(), l.label.clone(), "".into()]);
                row.push(format!("{:.4}", l.field_t(n0)?));
                for _ in &a.at_b {
                    row.push("".into());
                    if gate.is_some() {
                        row.push("".into());
                    }
                }
            }
        }
        row.push(also_u.join(","));
        table.push(row);
    }
    let cols = table[0].len();
    let widths: Vec<usize> = (0..cols)
        .map(|c| {
            table
                .iter()
                .map(|r| r[c].chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    for row in &table {
        let mut line = String::new();
        for (c, cell) in row.iter().enumerate() {
            let pad = widths[c] - cell.chars().count();
            // Numbers right-aligned, text left-aligned.
            let numeric = c == 1 || c == 2 || (c >= 4 && c + 1 < cols);
            if numeric {
                line.push_str(&" ".repeat(pad));
                line.push_str(cell);
            } else {
                line.push_str(cell);
                line.push_str(&" ".repeat(pad));
            }
            if c + 1 < cols {
                line.push_str("  ");
            }
        }
        writeln!(w, "{}", line.trim_end())?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct T {
        #[command(flatten)]
        a: Args,
    }

    fn args(v: &[&str]) -> Args {
        let mut all = vec!["x"];
        all.extend_from_slice(v);
        T::try_parse_from(all).unwrap().a
    }

    #[test]
    fn tbg_without_cell_is_a_clear_error() {
        let e = moire_of(&args(&["--stack", "tbg"]))
            .unwrap_err()
            .to_string();
        assert!(e.contains("--twist-deg") && e.contains("--n0-cm2"), "{e}");
        let e = moire_of(&args(&["--stack", "mono", "--twist-deg", "1.1"]))
            .unwrap_err()
            .to_string();
        assert!(e.contains("moiré"), "{e}");
        let e = spec_of(&args(&["--stack", "mono", "--families", "wannier"]), false)
            .unwrap_err()
            .to_string();
        assert!(e.contains("moiré"), "{e}");
    }

    #[test]
    fn json_carries_units_and_gate_voltage() {
        let a = args(&[
            "--stack",
            "hbn",
            "--alpha-cm2-per-v",
            "7e10",
            "--at-b",
            "10",
            "--json",
        ]);
        let cell = moire_of(&a).unwrap();
        let gate = gate_of(&a).unwrap();
        let spec = spec_of(&a, true).unwrap();
        let m = cell.unwrap().0;
        let lines = generate(&spec, Some(&m)).unwrap();
        let doc = json_document(&a, cell, gate, &lines, Some(m.n0_m2())).unwrap();
        let ls = doc["lines"].as_array().unwrap();
        let nu2 = ls.iter().find(|l| l["t"] == "2" && l["s"] == "0").unwrap();
        // ν = 2 at 10 T: n = 2 (e/h) 10 T = 4.835978e11 cm⁻² (e/h = 2.417989242e10 cm⁻²/T, SI 2019).
        let n = nu2["at_b"][0]["n_cm2"].as_f64().unwrap();
        assert!((n / 4.835_978_484e11 - 1.0).abs() < 1e-9, "{n}");
        let vg = nu2["at_b"][0]["vg_V"].as_f64().unwrap();
        assert!((vg - n / 7e10).abs() < 1e-9);
        assert!(doc["device"]["gate"]["alpha_cm2_per_V"].as_f64().is_some());
        assert!(ls.iter().any(|l| l["kind"] == "constant_flux"));
        let neg = ls.iter().find(|l| l["t"] == "-2").unwrap();
        assert!(neg["t"].as_str().unwrap().is_ascii());
    }
}
