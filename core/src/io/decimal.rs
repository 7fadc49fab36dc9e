//! The common shape of a measured number in text — an optional sign, up to 19 significant
//! digits with an optional decimal point, an optional exponent — read straight into an `f64`.
//!
//! When the digits fit in 2⁵³ and the decimal exponent is within ±22, both the integer mantissa
//! and the power of ten are exact doubles, so one IEEE multiplication or division gives the
//! correctly rounded value (Clinger's fast path, W. D. Clinger, "How to read floating point
//! numbers accurately", PLDI 1990). Anything else (more digits, larger exponents, `nan`, `inf`,
//! quotes, blanks) is left to the general parser by returning `None`.

/// Exact powers of ten 10⁰ … 10²² (all exactly representable in binary64).
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Skip an optional `+` or `-` at `s[*i]`; true for `-`.
#[inline(always)]
fn read_sign(s: &[u8], i: &mut usize) -> bool {
    match s.get(*i) {
        Some(b'-') => {
            *i += 1;
            true
        }
        Some(b'+') => {
            *i += 1;
            false
        }
        _ => false,
    }
}

/// Read a number starting at `s[i]`. Returns the correctly rounded value and the index of the
/// first byte after it, or `None` when the text is not in the fast shape (the caller then uses
/// the general parser on the whole cell).
#[inline(always)]
pub fn read_number(s: &[u8], mut i: usize) -> Option<(f64, usize)> {
    let n = s.len();
    let neg = read_sign(s, &mut i);
    let mut mantissa: u64 = 0;
    let mut digits = 0usize;
    while i < n && s[i].is_ascii_digit() {
        mantissa = mantissa.wrapping_mul(10).wrapping_add((s[i] - b'0') as u64);
        digits += 1;
        i += 1;
    }
    let mut exp10: i64 = 0;
    if i < n && s[i] == b'.' {
        i += 1;
        let start = i;
        while i < n && s[i].is_ascii_digit() {
            mantissa = mantissa.wrapping_mul(10).wrapping_add((s[i] - b'0') as u64);
            i += 1;
        }
        digits += i - start;
        exp10 -= (i - start) as i64;
    }
    if digits == 0 || digits > 19 {
        return None;
    }
    if i < n && (s[i] | 0x20) == b'e' {
        i += 1;
        let eneg = read_sign(s, &mut i);
        let start = i;
        let mut e: i64 = 0;
        while i < n && s[i].is_ascii_digit() {
            if e < 100_000 {
                e = e * 10 + (s[i] - b'0') as i64;
            }
            i += 1;
        }
        if i == start {
            return None;
        }
        exp10 += if eneg { -e } else { e };
    }
    if mantissa > 1u64 << 53 {
        return None;
    }
    let m = mantissa as f64;
    let v = if mantissa == 0 {
        0.0
    } else if exp10 == 0 {
        m
    } else if (1..=22).contains(&exp10) {
        m * POW10[exp10 as usize]
    } else if (-22..0).contains(&exp10) {
        m / POW10[(-exp10) as usize]
    } else {
        return None;
    };
    Some((if neg { -v } else { v }, i))
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn whole(s: &str) -> Option<f64> {
        read_number(s.as_bytes(), 0)
            .filter(|&(_, end)| end == s.len())
            .map(|(v, _)| v)
    }

    #[test]
    fn common_spellings() {
        for s in [
            "0",
            "-0",
            "12",
            "-40",
            "-39.979995",
            "95.09698302",
            "2.101930667",
            "1e5",
            "1.5E-3",
            "+7.25e+02",
            ".5",
            "5.",
            "-0.000012345",
            "25812.80745",
        ] {
            let want: f64 = s.parse().unwrap();
            assert_eq!(whole(s).map(f64::to_bits), Some(want.to_bits()), "{s}");
        }
    }

    #[test]
    fn outside_the_fast_shape_is_left_to_the_general_parser() {
        for s in [
            "",
            "-",
            ".",
            "e5",
            "1e",
            "1e+",
            "nan",
            "inf",
            "12345678901234567890",
            "1e300",
            "1e-300",
            "9007199254740993",
        ] {
            assert!(whole(s).is_none(), "{s}");
        }
    }

    #[test]
    fn stops_at_the_first_byte_that_is_not_part_of_the_number() {
        assert_eq!(read_number(b"1.25,3", 0), Some((1.25, 4)));
        assert_eq!(read_number(b"x,-2e1\n", 2), Some((-20.0, 6)));
    }

    proptest! {
        // Reference: Rust's standard library parser, which is correctly rounded for every input.
        #[test]
        fn agrees_bit_for_bit_with_the_standard_parser(
            m in 0u64..100_000_000_000_000_000u64, point in 0usize..19, e in -30i32..30, neg: bool,
            with_exp: bool,
        ) {
            let digits = m.to_string();
            let point = point.min(digits.len());
            let mut s = String::new();
            if neg { s.push('-'); }
            s.push_str(&digits[..digits.len() - point]);
            if point > 0 { s.push('.'); s.push_str(&digits[digits.len() - point..]); }
            if s.ends_with('-') || s.is_empty() { s.push('0'); }
            if with_exp { s.push_str(&format!("e{e}")); }
            let want: f64 = s.parse().unwrap();
            if let Some(v) = whole(&s) {
                prop_assert_eq!(v.to_bits(), want.to_bits(), "{}", s);
            }
        }
    }
}
