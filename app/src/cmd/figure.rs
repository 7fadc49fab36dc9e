//! `fanmark figure FILE -o OUT.{png,svg,pdf}`: a publication figure of one channel of a map in
//! one frame, with predicted lines, found states, labels, legend and colour bar.

use super::load_args::LoadArgs;
use crate::figure::build::{build_figure, FigureChoices, FrameKind, ScaleKind};
use crate::figure::style::styles_text;
use crate::figure::{write, Format};
use anyhow::{bail, Context, Result};
use fanmark_core::conductivity::SampleGeometry;
use fanmark_core::families::{
    generate, BrokenSymmetrySpec, BrownZakSpec, CompositeFermionSpec, FamilySpec, IntegerSpec,
    SatelliteSpec, WannierSpec,
};
use fanmark_core::gate::{Dielectric, SingleGate};
use fanmark_core::index::calibrate::Calibration;
use fanmark_core::index::run::classify;
use fanmark_core::index::stack::Stack;
use fanmark_core::index::{index_map, IndexOptions, IndexReport};
use fanmark_core::io::load_map;
use fanmark_core::line::{Family, Line};
use fanmark_core::map::{ChannelKind, Map, Quantity};
use fanmark_core::moire::Moire;
use fanmark_core::progress::NoProgress;
use fanmark_core::Rational;
use std::path::{Path, PathBuf};

/// Arguments of `fanmark figure`.
#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    /// Data file (not needed with --styles).
    #[arg(required_unless_present = "styles")]
    pub file: Option<PathBuf>,
    /// Output file; the format follows the extension: .png, .svg or .pdf.
    #[arg(
        short = 'o',
        long,
        value_name = "OUT",
        required_unless_present = "styles"
    )]
    pub out: Option<PathBuf>,
    /// Print the overlay style table (line families and state markers) and exit.
    #[arg(long)]
    pub styles: bool,
    /// Channel: rxx, rxy, sxx, sxy, drxx_dvg, drxx_dn, dsxy_dn, d2rxx_dn2, or a channel name.
    #[arg(long, default_value = "rxx")]
    pub channel: String,
    /// Frame: gate, density, filling or wannier (default: density with a calibration, else gate).
    #[arg(long)]
    pub frame: Option<String>,
    /// Heat-map palette (see `fanmark palettes`); default: sequential or diverging by channel.
    #[arg(long)]
    pub palette: Option<String>,
    /// Colour scale: linear, log or symlog (default: log for rxx and sxx, symlog for signed
    /// derivatives, else linear).
    #[arg(long)]
    pub scale: Option<String>,
    /// Colour range from these percentiles of the shown values (default 1,99; signed channels
    /// get a symmetric range at HI of |value|).
    #[arg(long, value_name = "LO,HI")]
    pub clip: Option<String>,
    /// Shown x range in the frame's units (V, 10¹² cm⁻², ν or n/n₀).
    #[arg(long, value_name = "A,B")]
    pub x_range: Option<String>,
    /// Shown y range in the frame's units (T or φ/φ₀).
    #[arg(long, value_name = "A,B")]
    pub y_range: Option<String>,
    /// Fixed colour range in the colour bar's units.
    #[arg(long, value_name = "A,B")]
    pub v_range: Option<String>,
    /// Predicted line families to overlay (comma separated): integer, broken_symmetry,
    /// composite_fermion, satellite, wannier, brown_zak, or filling (every ν = p/q with
    /// q ≤ --q-max and |ν| ≤ --nu-max).
    #[arg(long, value_name = "FAMILIES", value_delimiter = ',')]
    pub lines: Vec<String>,
    /// Largest denominator: of ν (filling), of s (wannier), of φ/φ₀ (brown_zak).
    #[arg(long, default_value_t = 1)]
    pub q_max: i64,
    /// Largest |t| of wannier and satellite lines.
    #[arg(long, default_value_t = 4)]
    pub t_max: i64,
    /// Largest |ν| of integer, broken_symmetry and filling lines.
    #[arg(long, default_value_t = 10)]
    pub nu_max: i64,
    /// Label at most this many predicted lines (the simplest fractions first; default about
    /// ten per 86 mm of width).
    #[arg(long)]
    pub label_max: Option<usize>,
    /// Device stack, for the Landau sequence and the indexer: monolayer, bilayer, monolayer-moire.
    #[arg(long, default_value = "monolayer")]
    pub stack: String,
    /// Found states to overlay and label: an index JSON written by `fanmark index --json`
    /// (its calibration and n₀ are used unless given otherwise).
    #[arg(long, value_name = "FILE")]
    pub states: Option<PathBuf>,
    /// Run the indexer on the map and overlay the states it finds.
    #[arg(long)]
    pub index: bool,
    /// Gate calibration JSON written by `fanmark calibrate --json`.
    #[arg(long, value_name = "FILE")]
    pub calibration: Option<PathBuf>,
    /// Gate lever arm α in cm⁻² V⁻¹.
    #[arg(long, value_name = "ALPHA")]
    pub alpha_cm2_per_v: Option<f64>,
    /// Gate dielectric thickness (m) and relative permittivity for the geometric lever arm,
    /// e.g. 285e-9,3.9.
    #[arg(long, value_name = "D_M,EPS")]
    pub gate_dielectric: Option<String>,
    /// Charge-neutrality gate voltage in V (default with α or a dielectric: the R_xx maximum of
    /// the lowest-field sweep).
    #[arg(long, value_name = "V")]
    pub v_cnp: Option<f64>,
    /// Moiré density n₀ (one carrier per cell) in cm⁻².
    #[arg(long, value_name = "N0")]
    pub n0_cm2: Option<f64>,
    /// Hall-bar width over probe distance W/L, for σ from R.
    #[arg(long, value_name = "W/L")]
    pub w_over_l: Option<f64>,
    /// Figure width in mm (86 single column, 178 double).
    #[arg(long, default_value_t = 86.0)]
    pub width_mm: f64,
    /// Figure height in mm.
    #[arg(long, default_value_t = 70.0)]
    pub height_mm: f64,
    /// Raster resolution in dots per inch (PNG).
    #[arg(long, default_value_t = 300.0)]
    pub dpi: f64,
    /// Title above the panel.
    #[arg(long)]
    pub title: Option<String>,
    #[command(flatten)]
    pub load: LoadArgs,
}

/// The output format of `path` from its extension.
pub fn format_of(path: &Path) -> Result<Format> {
    match path
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase())
        .as_deref()
    {
        Some("png") => Ok(Format::Png),
        Some("svg") => Ok(Format::Svg),
        Some("pdf") => Ok(Format::Pdf),
        _ => bail!(
            "{}: the output's extension must be .png, .svg or .pdf",
            path.display()
        ),
    }
}

fn pair(what: &str, text: &str) -> Result<(f64, f64)> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    if parts.len() != 2 {
        bail!("{what} `{text}`: expected two numbers A,B");
    }
    let num = |s: &str| {
        s.parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .with_context(|| format!("{what} `{text}`: `{s}` is not a finite number"))
    };
    Ok((num(parts[0])?, num(parts[1])?))
}

/// V_CNP as the gate voltage of the R_xx maximum of the lowest-|B| sweep, smoothed over 11
/// points (common practice: the Dirac peak at low field).
pub fn cnp_from_peak(map: &Map) -> Result<f64> {
    let rxx = map.require(ChannelKind::Rxx)?;
    if map.x().quantity != Quantity::Gate {
        bail!("V_CNP from the R_xx peak needs a gate-voltage axis; give --v-cnp");
    }
    let b = map.y().values();
    let row = (0..b.len())
        .min_by(|&i, &j| b[i].abs().total_cmp(&b[j].abs()))
        .context("empty map")?;
    let v = rxx.data.row(row);
    let n = v.len();
    let half = 5usize;
    let mut best = (f64::NEG_INFINITY, None);
    for j in 0..n {
        let (lo, hi) = (j.saturating_sub(half), (j + half + 1).min(n));
        let w: Vec<f64> = (lo..hi).map(|k| v[k]).filter(|x| x.is_finite()).collect();
        if w.is_empty() {
            continue;
        }
        let m = w.iter().sum::<f64>() / w.len() as f64;
        if m > best.0 {
            best = (m, Some(j));
        }
    }
    let j = best
        .1
        .context("the lowest-field sweep has no R_xx values")?;
    Ok(map.x().values()[j])
}

/// Every constant-filling line ν = p/q with q ≤ `q_max`, 0 < |ν| ≤ `nu_max`, each in the family
/// its (t, 0) classifies into for `stack`.
pub fn filling_lines(stack: Stack, q_max: i64, nu_max: i64) -> Result<Vec<Line>> {
    if q_max < 1 || nu_max < 1 {
        bail!("--q-max and --nu-max must be at least 1");
    }
    let mut seen = std::collections::BTreeSet::new();
    let mut out = Vec::new();
    for q in 1..=q_max {
        for p in 1..=nu_max * q {
            let r = Rational::new(p, q)?;
            for nu in [r, Rational::new(-p, q)?] {
                if !seen.insert(nu) {
                    continue;
                }
                let fam = match classify(stack, nu, Rational::ZERO).0 {
                    fanmark_core::index::run::StateClass::Integer => Family::Integer,
                    fanmark_core::index::run::StateClass::BrokenSymmetry => Family::BrokenSymmetry,
                    _ => Family::CompositeFermion,
                };
                out.push(Line::gap(
                    fam,
                    format!("ν = p/q, q ≤ {q_max}"),
                    nu,
                    Rational::ZERO,
                ));
            }
        }
    }
    Ok(out)
}

/// The predicted lines of the named families.
pub fn predicted_lines(
    names: &[String],
    stack: Stack,
    q_max: i64,
    t_max: i64,
    nu_max: i64,
    n0_m2: Option<f64>,
    b_max_t: f64,
) -> Result<Vec<Line>> {
    let mut spec = FamilySpec {
        landau: stack.landau(),
        integer: None,
        broken_symmetry: None,
        composite_fermion: None,
        satellite: None,
        wannier: None,
        brown_zak: None,
    };
    let mut lines = Vec::new();
    for name in names {
        match name.trim().replace('-', "_").as_str() {
            "" => {}
            "integer" => spec.integer = Some(IntegerSpec { nu_max }),
            "broken_symmetry" | "broken" => {
                spec.broken_symmetry = Some(BrokenSymmetrySpec { nu_max })
            }
            "composite_fermion" | "cf" => {
                spec.composite_fermion = Some(CompositeFermionSpec {
                    nu0_min: -2,
                    nu0_max: 1,
                    p_max: 3,
                    two_flux: true,
                    four_flux: false,
                })
            }
            "satellite" => {
                spec.satellite = Some(SatelliteSpec {
                    centres: vec![Rational::integer(-4), Rational::integer(4)],
                    t_max,
                })
            }
            "wannier" => {
                spec.wannier = Some(WannierSpec {
                    t_max: Rational::integer(t_max),
                    s_min: Rational::integer(-4),
                    s_max: Rational::integer(4),
                    s_den_max: q_max,
                    t_den_max: 1,
                    fractional_t_needs_fractional_s: true,
                })
            }
            "brown_zak" => {
                spec.brown_zak = Some(BrownZakSpec {
                    q_max: q_max.max(1),
                    b_max_t,
                })
            }
            "filling" => lines.extend(filling_lines(stack, q_max, nu_max)?),
            other => bail!(
                "--lines: `{other}` is not a family; use integer, broken_symmetry, composite_fermion, satellite, wannier, brown_zak or filling"
            ),
        }
    }
    let moire_wanted =
        spec.satellite.is_some() || spec.wannier.is_some() || spec.brown_zak.is_some();
    let moire = match n0_m2 {
        Some(n0) => Some(Moire::from_n0(n0)?),
        None if moire_wanted => bail!(
            "--lines satellite, wannier and brown_zak need the moiré density: give --n0-cm2 or --states from a moiré index"
        ),
        None => None,
    };
    lines.extend(generate(&spec, moire.as_ref())?);
    Ok(lines)
}

fn read_json<T: serde::de::DeserializeOwned>(path: &Path, what: &str) -> Result<T> {
    let text =
        std::fs::read_to_string(path).with_context(|| format!("reading {}", path.display()))?;
    serde_json::from_str(&text).with_context(|| format!("{}: not {what}", path.display()))
}

/// Run `fanmark figure`.
pub fn run(a: Args) -> Result<()> {
    if a.styles {
        print!("{}", styles_text());
        return Ok(());
    }
    let (Some(file), Some(out)) = (a.file.as_ref(), a.out.as_ref()) else {
        bail!("give a data file and -o OUT.png|svg|pdf");
    };
    let format = format_of(out)?;
    let stack: Stack = a.stack.parse()?;
    let mut clock = crate::timing::Stages::start();
    let map = load_map(file, &a.load.options()?, &NoProgress)?;
    clock.lap("load");

    // Calibration: explicit values first, then a calibration file, then an index report.
    let report: Option<IndexReport> = match &a.states {
        Some(p) => Some(read_json(p, "an index JSON (fanmark index --json)")?),
        None => None,
    };
    let mut calibration: Option<Calibration> = match &a.calibration {
        Some(p) => Some(read_json(
            p,
            "a calibration JSON (fanmark calibrate --json)",
        )?),
        None => report.as_ref().map(|r| r.calibration.clone()),
    };
    let mut n0_m2 = a.n0_cm2.map(|v| v * 1e4).or_else(|| {
        report
            .as_ref()
            .and_then(|r| r.moire.map(|m| m.n0_cm2 * 1e4))
    });
    let alpha_m2 = match (&a.alpha_cm2_per_v, &a.gate_dielectric) {
        (Some(_), Some(_)) => bail!("give either --alpha-cm2-per-v or --gate-dielectric, not both"),
        (Some(al), None) => Some(al * 1e4),
        (None, Some(text)) => {
            let (d, eps) = pair("--gate-dielectric", text)?;
            let diel = Dielectric {
                thickness_m: d,
                epsilon_r: eps,
            };
            Some(SingleGate::from_geometry(&diel, 0.0)?.alpha_m2_per_v)
        }
        (None, None) => None,
    };
    let mut gate = match alpha_m2 {
        Some(alpha) => Some(SingleGate {
            alpha_m2_per_v: alpha,
            v_cnp: match a.v_cnp {
                Some(v) => v,
                None => cnp_from_peak(&map)?,
            },
        }),
        None => calibration.as_ref().map(|c| {
            let mut g = c.gate();
            if let Some(v) = a.v_cnp {
                g.v_cnp = v;
            }
            g
        }),
    };
    let mut states = report.map(|r| r.states).unwrap_or_default();
    if a.index {
        let mut opts = IndexOptions::new(stack);
        opts.calibration = calibration.take();
        let r = index_map(&map, &opts).context("indexing the map")?;
        if gate.is_none() {
            gate = Some(r.calibration.gate());
        }
        if n0_m2.is_none() {
            n0_m2 = r.moire.map(|m| m.n0_cm2 * 1e4);
        }
        states = r.states;
    }

    let b_max = map.y().max().abs().max(map.y().min().abs());
    let lines = predicted_lines(&a.lines, stack, a.q_max, a.t_max, a.nu_max, n0_m2, b_max)?;
    let geometry = match a.w_over_l {
        Some(w) if w.is_finite() && w > 0.0 => Some(SampleGeometry::Squares(1.0 / w)),
        Some(w) => bail!("--w-over-l {w}: expected a positive ratio"),
        None => None,
    };
    let choices = FigureChoices {
        channel: a.channel.clone(),
        frame: a
            .frame
            .as_deref()
            .map(str::parse::<FrameKind>)
            .transpose()?,
        palette: a.palette.clone(),
        scale: a
            .scale
            .as_deref()
            .map(str::parse::<ScaleKind>)
            .transpose()?,
        clip_percent: a.clip.as_deref().map(|t| pair("--clip", t)).transpose()?,
        x_range: a
            .x_range
            .as_deref()
            .map(|t| pair("--x-range", t))
            .transpose()?,
        y_range: a
            .y_range
            .as_deref()
            .map(|t| pair("--y-range", t))
            .transpose()?,
        v_range: a
            .v_range
            .as_deref()
            .map(|t| pair("--v-range", t))
            .transpose()?,
        gate,
        n0_m2,
        geometry,
        lines,
        states,
        label_limit: a.label_max,
        width_mm: a.width_mm,
        height_mm: a.height_mm,
        dpi: a.dpi,
        title: a.title.clone(),
        ..FigureChoices::default()
    };
    clock.lap("prepare");
    let (fig, rep) = build_figure(&map, &choices)?;
    clock.lap("build");
    if format == Format::Png {
        // PNG in two timed stages: drawing the pixels, then encoding and writing the file.
        let pm = crate::figure::raster::render_rgba(&fig)?;
        clock.lap("draw");
        let png = crate::figure::raster::encode_png(&pm, fig.dpi)?;
        fanmark_core::io::write::write_atomic(out, &png)
            .with_context(|| format!("writing {}", out.display()))?;
    } else {
        write(&fig, format, out).with_context(|| format!("writing {}", out.display()))?;
    }
    clock.lap("write");
    let (w, h) = fig.pixel_size();
    println!(
        "wrote {} ({:.0} × {:.0} mm{}): {} predicted lines, {} found states{}",
        out.display(),
        a.width_mm,
        a.height_mm,
        if format == Format::Png {
            format!(", {w} × {h} px at {} dpi", a.dpi)
        } else {
            String::new()
        },
        rep.lines_drawn,
        rep.states_drawn,
        if rep.lines_skipped > 0 {
            format!(", {} not drawable in this frame", rep.lines_skipped)
        } else {
            String::new()
        }
    );
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn filling_lines_match_the_rational_count() {
        // Distinct p/q in (0, 10] with q ≤ 5: Σ_{q≤5} 10·φ(q) = 10·(1+1+2+2+4) = 100 (Euler's
        // totient counts the reduced numerators per unit interval), both signs: 200.
        let l = filling_lines(Stack::Monolayer, 5, 10).unwrap();
        assert_eq!(l.len(), 200);
        let fam = |t: i64| {
            l.iter()
                .find(|x| x.ts() == Some((Rational::integer(t), Rational::ZERO)))
                .unwrap()
                .family
        };
        // Monolayer: ν = ±2, ±6, ±10 are the degenerate sequence, ν = 1, 3, 4 are not.
        assert_eq!(fam(6), Family::Integer);
        assert_eq!(fam(-2), Family::Integer);
        assert_eq!(fam(4), Family::BrokenSymmetry);
        assert!(filling_lines(Stack::Monolayer, 0, 10).is_err());
    }

    #[test]
    fn families_parse_and_moire_ones_need_n0() {
        let names = |s: &str| s.split(',').map(String::from).collect::<Vec<_>>();
        let l = predicted_lines(&names("integer"), Stack::Monolayer, 1, 4, 10, None, 9.0).unwrap();
        // ±2, ±6, ±10.
        assert_eq!(l.len(), 6);
        assert!(predicted_lines(&names("wannier"), Stack::Monolayer, 1, 4, 10, None, 9.0).is_err());
        assert!(
            predicted_lines(&names("bogus"), Stack::Monolayer, 1, 4, 10, None, 9.0)
                .unwrap_err()
                .to_string()
                .contains("bogus")
        );
        let w = predicted_lines(
            &names("wannier,brown_zak"),
            Stack::MonolayerMoire,
            1,
            2,
            10,
            Some(2.4e16),
            120.0,
        )
        .unwrap();
        assert!(w.iter().any(|l| l.family == Family::Wannier));
        // φ/φ₀ = 1 at B = φ₀ n₀ = 4.1357e-15 T m² × 2.4e16 m⁻² = 99.3 T (q ≤ 1: the only one
        // below 120 T).
        let bz: Vec<&Line> = w.iter().filter(|l| l.family == Family::BrownZak).collect();
        assert_eq!(bz.len(), 1);
        assert!((bz[0].field_t(Some(2.4e16)).unwrap() - 99.257).abs() < 0.01);
        assert_eq!(pair("--clip", "1, 99").unwrap(), (1.0, 99.0));
        assert!(pair("--clip", "1").is_err());
        assert!(format_of(Path::new("a.PNG")).is_ok() && format_of(Path::new("a.jpg")).is_err());
    }
}
