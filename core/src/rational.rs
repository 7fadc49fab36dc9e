//! Exact rationals p/q for the line coefficients t and s, filling factors and flux ratios.
//!
//! Always stored reduced with a positive denominator, so equality is structural. Displayed and
//! serialised as `"p/q"` (or `"p"` when q = 1), the form used in every JSON output.

use std::cmp::Ordering;
use std::fmt;
use std::str::FromStr;

/// A reduced fraction `num/den` with `den > 0`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Rational {
    num: i64,
    den: i64,
}

/// Why a text or pair of integers is not a rational.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum RationalError {
    /// q = 0.
    #[error("denominator is zero")]
    ZeroDenominator,
    /// Text not of the form `p`, `p/q`, `-p/q`.
    #[error("`{0}` is not a fraction p/q with integers p and q")]
    Syntax(String),
    /// Arithmetic left the i64 range.
    #[error("fraction overflows 64-bit integers")]
    Overflow,
}

fn gcd(mut a: i64, mut b: i64) -> i64 {
    a = a.abs();
    b = b.abs();
    while b != 0 {
        let r = a % b;
        a = b;
        b = r;
    }
    a
}

impl Rational {
    /// Zero.
    pub const ZERO: Rational = Rational { num: 0, den: 1 };
    /// One.
    pub const ONE: Rational = Rational { num: 1, den: 1 };

    /// `num/den` reduced; errors on a zero denominator.
    pub fn new(num: i64, den: i64) -> Result<Rational, RationalError> {
        if den == 0 {
            return Err(RationalError::ZeroDenominator);
        }
        if num == i64::MIN || den == i64::MIN {
            return Err(RationalError::Overflow);
        }
        let g = gcd(num, den).max(1);
        let sign = if den < 0 { -1 } else { 1 };
        Ok(Rational {
            num: sign * num / g,
            den: sign * den / g,
        })
    }

    /// The integer `n` as `n/1`.
    pub const fn integer(n: i64) -> Rational {
        Rational { num: n, den: 1 }
    }

    /// Numerator of the reduced form (carries the sign).
    pub fn numer(&self) -> i64 {
        self.num
    }
    /// Denominator of the reduced form (always ≥ 1).
    pub fn denom(&self) -> i64 {
        self.den
    }
    /// True when the denominator is 1.
    pub fn is_integer(&self) -> bool {
        self.den == 1
    }
    /// True for 0/1.
    pub fn is_zero(&self) -> bool {
        self.num == 0
    }
    /// Nearest f64 value.
    pub fn to_f64(&self) -> f64 {
        self.num as f64 / self.den as f64
    }
    /// |p/q|.
    pub fn abs(&self) -> Rational {
        Rational {
            num: self.num.abs(),
            den: self.den,
        }
    }

    fn from_i128(num: i128, den: i128) -> Result<Rational, RationalError> {
        let g = {
            let (mut a, mut b) = (num.abs(), den.abs());
            while b != 0 {
                let r = a % b;
                a = b;
                b = r;
            }
            a.max(1)
        };
        let sign = if den < 0 { -1 } else { 1 };
        let (n, d) = (sign * num / g, sign * den / g);
        if d == 0 {
            return Err(RationalError::ZeroDenominator);
        }
        Ok(Rational {
            num: i64::try_from(n).map_err(|_| RationalError::Overflow)?,
            den: i64::try_from(d).map_err(|_| RationalError::Overflow)?,
        })
    }

    /// Exact sum; errors only on overflow.
    pub fn checked_add(self, o: Rational) -> Result<Rational, RationalError> {
        Self::from_i128(
            self.num as i128 * o.den as i128 + o.num as i128 * self.den as i128,
            self.den as i128 * o.den as i128,
        )
    }
    /// Exact difference; errors only on overflow.
    pub fn checked_sub(self, o: Rational) -> Result<Rational, RationalError> {
        self.checked_add(Rational {
            num: -o.num,
            den: o.den,
        })
    }
    /// Exact product; errors only on overflow.
    pub fn checked_mul(self, o: Rational) -> Result<Rational, RationalError> {
        Self::from_i128(
            self.num as i128 * o.num as i128,
            self.den as i128 * o.den as i128,
        )
    }
    /// Exact quotient; errors on division by zero or overflow.
    pub fn checked_div(self, o: Rational) -> Result<Rational, RationalError> {
        if o.num == 0 {
            return Err(RationalError::ZeroDenominator);
        }
        Self::from_i128(
            self.num as i128 * o.den as i128,
            self.den as i128 * o.num as i128,
        )
    }

    /// Best rational approximations of `x` with denominator ≤ `max_den`, from the continued
    /// fraction of x (convergents and the admissible semiconvergents), in order of increasing
    /// denominator; the last one is the closest fraction with a denominator within the bound.
    /// Returns an empty list for a non-finite x or max_den < 1.
    pub fn best_approximations(x: f64, max_den: i64) -> Vec<Rational> {
        let mut out = Vec::new();
        if !x.is_finite() || max_den < 1 || x.abs() > 1e15 {
            return out;
        }
        // Convergents h_k/k_k of the continued fraction, with semiconvergents between them.
        let (mut h0, mut h1) = (0i128, 1i128);
        let (mut k0, mut k1) = (1i128, 0i128);
        let mut r = x;
        let mut best_err = f64::INFINITY;
        for _ in 0..64 {
            let a = r.floor();
            let ai = a as i128;
            // Semiconvergents (h0 + m h1)/(k0 + m k1) for m = ceil(a/2)..a.
            let m_lo = if ai > 1 { (ai + 1) / 2 } else { ai };
            for m in m_lo.max(1)..=ai {
                let (h, k) = (h0 + m * h1, k0 + m * k1);
                if k > max_den as i128 {
                    break;
                }
                if let Ok(q) = Self::from_i128(h, k) {
                    let err = (q.to_f64() - x).abs();
                    if err < best_err && out.last() != Some(&q) {
                        best_err = err;
                        out.push(q);
                    }
                }
            }
            let (h2, k2) = (ai * h1 + h0, ai * k1 + k0);
            if k2 > max_den as i128 {
                break;
            }
            (h0, h1, k0, k1) = (h1, h2, k1, k2);
            let frac = r - a;
            if frac.abs() < 1e-12 {
                break;
            }
            r = 1.0 / frac;
        }
        out
    }

    /// The closest fraction to `x` whose denominator is at most `max_den` (ties to the smaller
    /// denominator); `None` for a non-finite x.
    pub fn nearest_with_max_den(x: f64, max_den: i64) -> Option<Rational> {
        Self::best_approximations(x, max_den).last().copied()
    }
}

impl PartialOrd for Rational {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Rational {
    fn cmp(&self, other: &Self) -> Ordering {
        (self.num as i128 * other.den as i128).cmp(&(other.num as i128 * self.den as i128))
    }
}

impl fmt::Display for Rational {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.den == 1 {
            write!(f, "{}", self.num)
        } else {
            write!(f, "{}/{}", self.num, self.den)
        }
    }
}

impl FromStr for Rational {
    type Err = RationalError;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let t = s.trim().replace('−', "-");
        let bad = || RationalError::Syntax(s.to_string());
        match t.split_once('/') {
            Some((p, q)) => {
                let p: i64 = p.trim().parse().map_err(|_| bad())?;
                let q: i64 = q.trim().parse().map_err(|_| bad())?;
                Rational::new(p, q)
            }
            None => Ok(Rational::integer(t.parse().map_err(|_| bad())?)),
        }
    }
}

impl From<i64> for Rational {
    fn from(n: i64) -> Self {
        Rational::integer(n)
    }
}

impl serde::Serialize for Rational {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}
impl<'de> serde::Deserialize<'de> for Rational {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let s = String::deserialize(d)?;
        s.parse().map_err(serde::de::Error::custom)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn r(p: i64, q: i64) -> Rational {
        Rational::new(p, q).unwrap()
    }

    #[test]
    fn reduces_and_normalises_sign() {
        assert_eq!(r(6, -4), r(-3, 2));
        assert_eq!(r(6, -4).to_string(), "-3/2");
        assert_eq!(r(4, 2).to_string(), "2");
        assert_eq!(r(0, -7), Rational::ZERO);
        assert!(Rational::new(1, 0).is_err());
    }

    #[test]
    fn parses_and_orders() {
        assert_eq!("2/3".parse::<Rational>().unwrap(), r(2, 3));
        assert_eq!("−5/2".parse::<Rational>().unwrap(), r(-5, 2));
        assert_eq!(" 4 ".parse::<Rational>().unwrap(), r(4, 1));
        assert!("2/x".parse::<Rational>().is_err());
        assert!(r(1, 3) < r(2, 5));
        assert!(r(-1, 2) < r(-1, 3));
        let json = serde_json::to_string(&r(-2, 5)).unwrap();
        assert_eq!(json, "\"-2/5\"");
        assert_eq!(serde_json::from_str::<Rational>(&json).unwrap(), r(-2, 5));
    }

    #[test]
    fn arithmetic_is_exact() {
        assert_eq!(r(1, 3).checked_add(r(1, 6)).unwrap(), r(1, 2));
        assert_eq!(r(2, 3).checked_mul(r(3, 4)).unwrap(), r(1, 2));
        assert_eq!(r(2, 3).checked_div(r(4, 3)).unwrap(), r(1, 2));
        assert!(r(1, 2).checked_div(Rational::ZERO).is_err());
    }

    #[test]
    fn best_approximations_follow_the_continued_fraction() {
        // π's convergents 3, 22/7, 333/106, 355/113 (classical; from memory, easily rechecked).
        let a = Rational::best_approximations(std::f64::consts::PI, 120);
        assert!(a.contains(&r(22, 7)));
        assert!(a.contains(&r(333, 106)));
        assert_eq!(*a.last().unwrap(), r(355, 113));
        assert_eq!(Rational::nearest_with_max_den(0.6667, 9), Some(r(2, 3)));
        assert_eq!(Rational::nearest_with_max_den(-1.249, 5), Some(r(-5, 4)));
        assert_eq!(Rational::nearest_with_max_den(f64::NAN, 5), None);
    }
}
