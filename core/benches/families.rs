//! Generation time of a full moiré family set with q_max = 9: integer, broken-symmetry,
//! composite-fermion, satellite, Wannier and Brown–Zak lines for graphene aligned to hBN.
//! Prints the line count and the median wall time. Run: `cargo bench -p fanmark-core --bench families`.

use fanmark_core::families::{
    generate, BrokenSymmetrySpec, BrownZakSpec, CompositeFermionSpec, FamilySpec, IntegerSpec,
    LandauSequence, SatelliteSpec, WannierSpec,
};
use fanmark_core::hofstadter::rank_lines_by_gap;
use fanmark_core::moire::{Moire, GRAPHENE_LATTICE_M, HBN_MISMATCH_DEFAULT};
use fanmark_core::Rational;
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let q_max = 9;
    let moire = Moire::graphene_hbn(0.0, GRAPHENE_LATTICE_M, HBN_MISMATCH_DEFAULT)
        .expect("aligned graphene/hBN cell");
    let spec = FamilySpec {
        landau: LandauSequence::monolayer(),
        integer: Some(IntegerSpec { nu_max: 30 }),
        broken_symmetry: Some(BrokenSymmetrySpec { nu_max: 30 }),
        composite_fermion: Some(CompositeFermionSpec {
            nu0_min: -4,
            nu0_max: 3,
            p_max: 9,
            two_flux: true,
            four_flux: true,
        }),
        satellite: Some(SatelliteSpec {
            centres: [-4, -2, 2, 4].map(Rational::integer).to_vec(),
            t_max: 30,
        }),
        wannier: Some(WannierSpec {
            t_max: Rational::integer(4),
            s_min: Rational::integer(-4),
            s_max: Rational::integer(4),
            s_den_max: q_max,
            t_den_max: q_max,
            fractional_t_needs_fractional_s: true,
        }),
        brown_zak: Some(BrownZakSpec {
            q_max,
            b_max_t: 45.0,
        }),
    };

    let runs = 15;
    let mut times = Vec::with_capacity(runs);
    let mut count = 0;
    for _ in 0..runs {
        let t0 = Instant::now();
        let lines = generate(&spec, Some(&moire)).expect("family set");
        times.push(t0.elapsed().as_secs_f64());
        count = lines.len();
        std::hint::black_box(&lines);
    }
    println!(
        "families: full set q_max = {q_max}: {count} lines, median {:.2} ms over {runs} runs",
        median(times) * 1e3
    );

    // Ranking the integer Wannier lines by square-lattice gap width, q ≤ 9.
    let lines = generate(&spec, Some(&moire)).expect("family set");
    let integer_wannier: Vec<_> = lines
        .into_iter()
        .filter(|l| {
            l.ts()
                .is_some_and(|(t, s)| t.is_integer() && s.is_integer())
        })
        .collect();
    let mut rank_times = Vec::new();
    for _ in 0..5 {
        let t0 = Instant::now();
        let ranks = rank_lines_by_gap(&integer_wannier, q_max).expect("ranking");
        rank_times.push(t0.elapsed().as_secs_f64());
        std::hint::black_box(ranks);
    }
    println!(
        "families: rank {} integer lines by gap (q <= {q_max}): median {:.2} ms",
        integer_wannier.len(),
        median(rank_times) * 1e3
    );
}
