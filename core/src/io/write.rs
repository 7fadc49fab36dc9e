//! Writing the project's own files: long-format CSV from sweeps, and atomic file replacement
//! (write to a temporary file beside the target, fsync, rename) so a crash never leaves a
//! half-written file.

use crate::error::{Error, Result};
use crate::map::RawSweep;
use std::io::Write;
use std::path::Path;

/// Write `bytes` to `path` atomically: a temporary sibling is written and fsynced, then renamed
/// over the target, and the directory is fsynced. Readers see the old or the new file, never a
/// mixture.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let io = |source| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => std::path::PathBuf::from("."),
    };
    let name = path.file_name().ok_or_else(|| {
        Error::invalid(
            "output path",
            format!("{} has no file name", path.display()),
        )
    })?;
    let tmp = dir.join(format!(
        ".{}.tmp-{}",
        name.to_string_lossy(),
        std::process::id()
    ));
    {
        let mut f = std::fs::File::create(&tmp).map_err(io)?;
        f.write_all(bytes).map_err(io)?;
        f.sync_all().map_err(io)?;
    }
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        io(e)
    })?;
    if let Ok(d) = std::fs::File::open(&dir) {
        let _ = d.sync_all();
    }
    Ok(())
}

/// Format sweeps as long-format CSV text: header `swept,stepped,channels…`, one row per point in
/// sweep order. `scale` converts SI values to the header's units, one factor per column
/// (swept, stepped, then channels). Values are written with `digits` significant digits.
pub fn long_csv_text(
    headers: &[&str],
    scale: &[f64],
    sweeps: &[RawSweep],
    digits: usize,
) -> String {
    let mut out = String::with_capacity(sweeps.iter().map(|s| s.swept.len() * 48).sum());
    out.push_str(&headers.join(","));
    out.push('\n');
    let fmt = |out: &mut String, v: f64| {
        use std::fmt::Write as _;
        if v.is_nan() {
            out.push_str("nan");
        } else if v == 0.0 {
            out.push('0');
        } else {
            let _ = write!(out, "{}", SigFig(v, digits));
        }
    };
    for s in sweeps {
        for (i, &x) in s.swept.iter().enumerate() {
            fmt(&mut out, x / scale[0]);
            out.push(',');
            fmt(&mut out, s.step_value / scale[1]);
            for (c, col) in s.values.iter().enumerate() {
                out.push(',');
                fmt(&mut out, col[i] / scale[2 + c]);
            }
            out.push('\n');
        }
    }
    out
}

/// A number shown with a fixed count of significant digits, shortest form (no trailing zeros).
struct SigFig(f64, usize);

impl std::fmt::Display for SigFig {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let (v, d) = (self.0, self.1.max(1));
        let s = format!("{:.*e}", d - 1, v);
        // Re-parse through f64 to drop trailing zeros and pick the shortest exact text.
        let r: f64 = s.parse().unwrap_or(v);
        write!(f, "{r}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::map::SweepDirection;

    #[test]
    fn atomic_write_replaces_whole_file() {
        let dir = std::env::temp_dir().join(format!("fanmark-atomic-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("a.json");
        write_atomic(&p, b"first").unwrap();
        write_atomic(&p, b"second").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"second");
        let leftovers: Vec<_> = std::fs::read_dir(&dir)
            .unwrap()
            .filter_map(|e| e.ok())
            .filter(|e| e.file_name().to_string_lossy().contains(".tmp-"))
            .collect();
        assert!(leftovers.is_empty());
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn csv_text_rounds_to_digits() {
        let s = RawSweep {
            step_value: 1.5,
            direction: SweepDirection::Up,
            first_line: 0,
            swept: vec![0.1, 1.0 / 3.0],
            values: vec![vec![1234.5678, f64::NAN]],
        };
        let t = long_csv_text(&["vg_V", "b_T", "rxx_ohm"], &[1.0, 1.0, 1.0], &[s], 6);
        assert_eq!(t, "vg_V,b_T,rxx_ohm\n0.1,1.5,1234.57\n0.333333,1.5,nan\n");
    }
}
