//! Loading matrix text, `.npy` and `.npz` through `load_map`: good files (values, SI units,
//! orientation, reversal) and bad ones (each error names the file and the problem). Files
//! written by NumPy itself are used when python3 with numpy is available; otherwise those tests
//! print a note and return.

use fanmark_core::io::{load_map, Format, LoadOptions, MatrixOptions};
use fanmark_core::progress::{NoProgress, Progress};
use fanmark_core::{ChannelKind, Error, Quantity};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};

static COUNTER: AtomicUsize = AtomicUsize::new(0);

fn scratch() -> PathBuf {
    let d = std::env::temp_dir().join(format!(
        "fanmark-loaders-it-{}-{}",
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// A version-1 `.npy` written byte by byte as the format's documentation lays it out.
fn npy_bytes(descr: &str, shape: &str, body: &[u8]) -> Vec<u8> {
    let mut dict = format!("{{'descr': '{descr}', 'fortran_order': False, 'shape': {shape}, }}");
    while (10 + dict.len() + 1) % 64 != 0 {
        dict.push(' ');
    }
    dict.push('\n');
    let mut out = b"\x93NUMPY\x01\x00".to_vec();
    out.extend((dict.len() as u16).to_le_bytes());
    out.extend(dict.as_bytes());
    out.extend(body);
    out
}

fn f64s(v: &[f64]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

fn err(path: &Path, opts: &LoadOptions) -> String {
    match load_map(path, opts, &NoProgress) {
        Ok(_) => panic!("{} loaded but should have failed", path.display()),
        Err(e) => e.to_string(),
    }
}

/// Run python3 with numpy; `None` (and a printed note) when either is missing.
fn python_numpy(script: &str) -> Option<()> {
    let ok = Command::new("python3")
        .args(["-c", "import numpy"])
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false);
    if !ok {
        eprintln!("note: python3 with numpy is not available; skipping a NumPy-written-file test");
        return None;
    }
    let out = Command::new("python3")
        .args(["-c", script])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "python failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    Some(())
}

#[derive(Default)]
struct CountingProgress {
    starts: AtomicU64,
    last: AtomicU64,
    finishes: AtomicU64,
}

impl Progress for CountingProgress {
    fn start(&self, _what: &str, _total: u64) {
        self.starts.fetch_add(1, Ordering::Relaxed);
    }
    fn set(&self, done: u64) {
        self.last.store(done, Ordering::Relaxed);
    }
    fn finish(&self) {
        self.finishes.fetch_add(1, Ordering::Relaxed);
    }
}

#[test]
fn matrix_text_through_load_map_in_si_with_reversal() {
    let d = scratch();
    // Gate in mV decreasing along the columns, field in T increasing, R_xx in kΩ, tab
    // delimited, Windows line ends, a BOM and a comment.
    let p = d.join("sweep.mat");
    std::fs::write(
        &p,
        "\u{feff}# cooldown 3\r\nB\\Vg\t50\t0\t-50\r\n0\t1.5\t2.5\tnan\r\n2\t4\t5\t6\r\n",
    )
    .unwrap();
    let opts = LoadOptions {
        matrix: MatrixOptions {
            x_header: Some("Vg (mV)".into()),
            channel_header: Some("rxx_kohm".into()),
            ..MatrixOptions::default()
        },
        ..LoadOptions::default()
    };
    let progress = CountingProgress::default();
    let m = load_map(&p, &opts, &progress).unwrap();
    assert_eq!(m.x().values(), &[-0.05, 0.0, 0.05]);
    assert_eq!(m.x().quantity, Quantity::Gate);
    assert_eq!(m.x().unit, "V");
    assert_eq!(m.y().values(), &[0.0, 2.0]);
    let c = m.channel("rxx").unwrap();
    assert_eq!(c.kind, ChannelKind::Rxx);
    assert_eq!(c.unit, "Ω");
    assert!(c.data[[0, 0]].is_nan());
    assert_eq!(c.data[[0, 2]], 1500.0);
    assert_eq!(c.data[[1, 0]], 6000.0);
    assert_eq!(m.meta.source.as_deref(), Some(p.as_path()));
    assert_eq!(progress.starts.load(Ordering::Relaxed), 1);
    assert_eq!(progress.finishes.load(Ordering::Relaxed), 1);
    assert!(progress.last.load(Ordering::Relaxed) > 0);

    // A .txt file is long-format CSV by default; forcing the format reads it as a matrix.
    let q = d.join("sweep.txt");
    std::fs::copy(&p, &q).unwrap();
    let forced = LoadOptions {
        format: Some(Format::Matrix),
        ..opts
    };
    assert_eq!(load_map(&q, &forced, &NoProgress).unwrap().shape(), (2, 3));
}

#[test]
fn matrix_text_errors_name_file_and_problem() {
    let d = scratch();
    let opts = LoadOptions {
        format: Some(Format::Matrix),
        ..LoadOptions::default()
    };
    let cases: [(&str, &str, &[&str]); 5] = [
        (
            "const.txt",
            "x 1 2\n0.5 1 2\n0.5 3 4\n",
            &["const.txt", "b_T", "constant"],
        ),
        (
            "zigzag.txt",
            "x 1 3 2\n0 1 2 3\n1 3 4 5\n",
            &["zigzag.txt", "vg_V", "not monotonic", "point 3"],
        ),
        (
            "word.txt",
            "x 1 2\n0 1 two\n",
            &["word.txt:2", "column 3", "`two`"],
        ),
        (
            "ragged.txt",
            "x 1 2\n0 1 2\n1 3 4 5\n",
            &["ragged.txt:3", "4 cells", "has 3"],
        ),
        ("empty.txt", "", &["empty.txt", "empty"]),
    ];
    for (name, text, needles) in cases {
        let p = d.join(name);
        std::fs::write(&p, text).unwrap();
        let e = err(&p, &opts);
        for n in needles {
            assert!(e.contains(n), "{name}: `{n}` missing from: {e}");
        }
    }
    // Axis file with the wrong length: both numbers are named.
    let p = d.join("body.txt");
    std::fs::write(&p, "1,2,3\n4,5,6\n").unwrap();
    let xf = d.join("gate.txt");
    std::fs::write(&xf, "0\n1\n2\n3\n").unwrap();
    let yf = d.join("field.txt");
    std::fs::write(&yf, "0 1\n").unwrap();
    let bad = LoadOptions {
        format: Some(Format::Matrix),
        matrix: MatrixOptions {
            x_axis_file: Some(xf),
            y_axis_file: Some(yf),
            ..MatrixOptions::default()
        },
        ..LoadOptions::default()
    };
    let e = err(&p, &bad);
    assert!(
        e.contains("body.txt")
            && e.contains("gate.txt")
            && e.contains("4 values")
            && e.contains("3 columns"),
        "{e}"
    );
}

#[test]
fn missing_path_and_directory_are_refused_by_name() {
    let d = scratch();
    let missing = d.join("nowhere.npz");
    let e = load_map(&missing, &LoadOptions::default(), &NoProgress).unwrap_err();
    assert!(matches!(e, Error::Io { .. }), "{e}");
    assert!(e.to_string().contains("nowhere.npz"), "{e}");
    let dir = d.join("folder.npy");
    std::fs::create_dir_all(&dir).unwrap();
    let e = load_map(&dir, &LoadOptions::default(), &NoProgress).unwrap_err();
    assert!(matches!(e, Error::IsDirectory { .. }), "{e}");
    assert!(e.to_string().contains("folder.npy"), "{e}");
}

#[test]
fn npy_good_and_bad_files() {
    let d = scratch();
    let x = [0.0, 1.0, 2.0];
    let y = [-1.0, 1.0];
    std::fs::write(d.join("r.x.npy"), npy_bytes("<f8", "(3,)", &f64s(&x))).unwrap();
    std::fs::write(d.join("r.y.npy"), npy_bytes("<f8", "(2,)", &f64s(&y))).unwrap();
    let p = d.join("r.npy");
    std::fs::write(
        &p,
        npy_bytes("<f8", "(2, 3)", &f64s(&[1.0, 2.0, 3.0, 4.0, 5.0, 6.0])),
    )
    .unwrap();
    let opts = LoadOptions {
        matrix: MatrixOptions {
            channel_header: Some("rxy_kohm".into()),
            ..MatrixOptions::default()
        },
        ..LoadOptions::default()
    };
    let m = load_map(&p, &opts, &NoProgress).unwrap();
    assert_eq!(m.channel("rxy").unwrap().data[[1, 2]], 6000.0);
    assert_eq!(m.y().values(), &y);

    // Wrong dtype.
    let c = d.join("cplx.npy");
    std::fs::write(&c, npy_bytes("<c16", "(2, 3)", &[0u8; 96])).unwrap();
    let e = err(&c, &opts);
    assert!(e.contains("cplx.npy") && e.contains("complex128"), "{e}");
    // Truncated body: expected and found byte counts.
    let t = d.join("cut.npy");
    std::fs::write(&t, npy_bytes("<f8", "(2, 3)", &f64s(&[1.0; 5]))).unwrap();
    let e = err(&t, &opts);
    assert!(
        e.contains("cut.npy") && e.contains("48 bytes") && e.contains("40 bytes"),
        "{e}"
    );
    // Header claiming far more than the file holds: refused, not allocated.
    let h = d.join("huge.npy");
    std::fs::write(
        &h,
        npy_bytes("<f8", "(4000000000, 4000000000)", &f64s(&[1.0; 6])),
    )
    .unwrap();
    let e = err(&h, &opts);
    assert!(
        e.contains("huge.npy") && (e.contains("truncated") || e.contains("impossibly")),
        "{e}"
    );
    // Empty file.
    let z = d.join("zero.npy");
    std::fs::write(&z, b"").unwrap();
    let e = load_map(&z, &opts, &NoProgress).unwrap_err();
    assert!(
        matches!(e, Error::EmptyFile { .. }) && e.to_string().contains("zero.npy"),
        "{e}"
    );
    // Axis vector of the wrong length (given explicitly, as text).
    let xf = d.join("four.txt");
    std::fs::write(&xf, "0\n1\n2\n3\n").unwrap();
    let bad = LoadOptions {
        matrix: MatrixOptions {
            x_axis_file: Some(xf),
            ..MatrixOptions::default()
        },
        ..LoadOptions::default()
    };
    let e = err(&p, &bad);
    assert!(
        e.contains("r.npy") && e.contains("(2, 3)") && e.contains("4 x values"),
        "{e}"
    );
}

#[test]
fn npz_written_by_the_benchmark_generator_loads() {
    let d = scratch();
    let csv = d.join("bench.csv");
    let script = format!(
        "import runpy, sys; sys.argv = ['gen_map.py', '50', '40', '{}']; \
         runpy.run_path('/work/shared/bench/gen_map.py', run_name='__main__')",
        csv.display()
    );
    if !Path::new("/work/shared/bench/gen_map.py").exists() || python_numpy(&script).is_none() {
        eprintln!("note: skipping the generator .npz test");
        return;
    }
    let npz = d.join("bench.npz");
    let m = load_map(&npz, &LoadOptions::default(), &NoProgress).unwrap();
    assert_eq!(m.shape(), (40, 50));
    assert_eq!(m.x().quantity, Quantity::Gate);
    assert_eq!(m.y().quantity, Quantity::Field);
    // The generator's axes: linspace(-40, 40, 50) V and linspace(0, 14, 40) T.
    assert!((m.x().min() + 40.0).abs() < 1e-9 && (m.x().max() - 40.0).abs() < 1e-9);
    assert!((m.y().max() - 14.0).abs() < 1e-9);
    // Every value must equal the CSV the same run wrote (same digits in both files).
    let text = std::fs::read_to_string(&csv).unwrap();
    let rxx = &m.channel("rxx").unwrap().data;
    let rxy = &m.channel("rxy").unwrap().data;
    let mut checked = 0;
    for (k, line) in text.lines().skip(1).enumerate() {
        let v: Vec<f64> = line.split(',').map(|s| s.parse().unwrap()).collect();
        let (i, j) = (k / 50, k % 50);
        assert_eq!(m.x().values()[j], v[0]);
        assert_eq!(m.y().values()[i], v[1]);
        assert_eq!(rxx[[i, j]], v[2], "rxx at row {i}, column {j}");
        assert_eq!(rxy[[i, j]], v[3], "rxy at row {i}, column {j}");
        checked += 1;
    }
    assert_eq!(checked, 2000);
}

#[test]
fn npy_written_by_numpy_fortran_order_and_other_dtypes() {
    let d = scratch();
    let script = format!(
        "import numpy as np\n\
         a = np.arange(6, dtype=np.float64).reshape(2, 3) * 1.5\n\
         np.save('{d}/f.npy', np.asfortranarray(a.astype(np.float32)))\n\
         np.save('{d}/f.x.npy', np.array([3.0, 2.0, 1.0]))\n\
         np.save('{d}/f.y.npy', np.array([0.0, 1.0]))\n\
         np.save('{d}/be.npy', a.astype('>i8'))\n\
         np.save('{d}/be.x.npy', np.array([1, 2, 3], dtype=np.int32))\n\
         np.save('{d}/be.y.npy', np.array([5.0, 6.0], dtype=np.float32))\n\
         np.save('{d}/bool.npy', a > 2)\n\
         np.save('{d}/bool.x.npy', np.array([1.0, 2.0, 3.0]))\n\
         np.save('{d}/bool.y.npy', np.array([1.0, 2.0]))\n",
        d = d.display()
    );
    if python_numpy(&script).is_none() {
        return;
    }
    let m = load_map(&d.join("f.npy"), &LoadOptions::default(), &NoProgress).unwrap();
    let c = &m.channel("rxx").unwrap().data;
    // x was decreasing (3, 2, 1): map column 0 is file column 2.
    assert_eq!(m.x().values(), &[1.0, 2.0, 3.0]);
    assert_eq!(c[[0, 0]], 3.0);
    assert_eq!(c[[1, 0]], 7.5);
    assert_eq!(c[[1, 2]], 4.5);
    let m = load_map(&d.join("be.npy"), &LoadOptions::default(), &NoProgress).unwrap();
    assert_eq!(m.channel("rxx").unwrap().data[[1, 1]], 6.0);
    assert_eq!(m.y().values(), &[5.0, 6.0]);
    let e = err(&d.join("bool.npy"), &LoadOptions::default());
    assert!(e.contains("bool.npy") && e.contains("bool"), "{e}");
}
