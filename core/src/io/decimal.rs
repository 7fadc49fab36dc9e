//! The common shape of a measured number in text — an optional sign, up to 19 significant
//! digits with an optional decimal point, an optional exponent — read straight into an `f64`.
//!
//! A fraction of eight digits or more takes its first eight in one step (all tested and combined
//! at once in a 64-bit word); other digits are read one at a time.
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

/// The value of the eight ASCII digits at `s[i..i + 8]`, or `None` if there are fewer than eight
/// bytes or any of them is not a digit.
#[inline(always)]
fn eight_digits(s: &[u8], i: usize) -> Option<u64> {
    const ONES: u64 = 0x0101_0101_0101_0101;
    let bytes: [u8; 8] = s.get(i..i + 8)?.try_into().ok()?;
    let word = u64::from_le_bytes(bytes);
    // A digit byte 0x30–0x39 has high nibble 3, and still has after adding 6; every other byte
    // fails one of the two (a byte ≥ 0xFA carries into the next, but fails itself).
    let nibbles = (word & (0xF0 * ONES)) | ((word.wrapping_add(0x06 * ONES) & (0xF0 * ONES)) >> 4);
    if nibbles != 0x33 * ONES {
        return None;
    }
    // The digit values (first byte most significant), combined into pairs, then quadruples,
    // then the whole.
    let d = word - 0x30 * ONES;
    let d = d.wrapping_mul(10).wrapping_add(d >> 8);
    let d = (d & 0x0000_00FF_0000_00FF)
        .wrapping_mul(100 + (1_000_000 << 32))
        .wrapping_add(((d >> 16) & 0x0000_00FF_0000_00FF).wrapping_mul(1 + (10_000 << 32)));
    Some(d >> 32)
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
        if let Some(eight) = eight_digits(s, i) {
            mantissa = mantissa.wrapping_mul(100_000_000).wrapping_add(eight);
            i += 8;
        }
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

    #[test]
    fn eight_digits_only_when_all_eight_are_digits() {
        assert_eq!(eight_digits(b"09698302", 0), Some(9_698_302));
        assert_eq!(eight_digits(b"x12345678", 1), Some(12_345_678));
        assert_eq!(eight_digits(b"1234567", 0), None);
        for k in 0..8 {
            for b in 0..=255u8 {
                let mut w = *b"31415926";
                w[k] = b;
                let want = w
                    .iter()
                    .all(u8::is_ascii_digit)
                    .then(|| std::str::from_utf8(&w).unwrap().parse::<u64>().unwrap());
                assert_eq!(eight_digits(&w, 0), want, "{w:?}");
            }
        }
    }

    #[test]
    fn long_fractions_and_fractions_at_the_end_of_the_text() {
        for s in [
            "1234567.89012",
            "0.0000000012345",
            "2.101930667",
            "95.09698302",
            "-1.5",
        ] {
            for after in ["", ",", "\n", "e3", ",1,2,3,4,5,6,7,8"] {
                let text = format!("{s}{after}");
                let whole = if after == "e3" {
                    text.clone()
                } else {
                    s.to_string()
                };
                let want: f64 = whole.parse().unwrap();
                let (v, end) = read_number(text.as_bytes(), 0).unwrap();
                assert_eq!((v.to_bits(), end), (want.to_bits(), whole.len()), "{text}");
            }
        }
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
