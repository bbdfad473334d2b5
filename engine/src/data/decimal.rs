//! Exact decimal shifting of numeric text.
//!
//! A value such as `1000000000000.4` has no exact binary form: parsing it to f64 keeps about
//! 16 significant digits, so the `.4` that carries the variation is mostly lost. Subtracting a
//! common integer offset *in decimal*, on the digits as written, and converting only the small
//! remainder to f64 keeps every written digit. Sums of squares, F and the other location-free
//! statistics are computed from the shifted values; means add the offset back.
//!
//! Values that are not plain decimals (exponent form, more than 36 digits) fall back to
//! `f64` parsing and subtraction, which is still exact for ordinary lab data.

/// A plain decimal `m × 10^-scale`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Decimal {
    /// The digits as an integer, with sign.
    pub mantissa: i128,
    /// The number of digits after the point.
    pub scale: u32,
}

/// Parses `[+-]digits[.digits]` (at most 36 digits) exactly.
pub fn parse_decimal(s: &str) -> Option<Decimal> {
    let s = s.trim();
    let (neg, body) = match s.as_bytes().first()? {
        b'-' => (true, &s[1..]),
        b'+' => (false, &s[1..]),
        _ => (false, s),
    };
    let (int, frac) = match body.split_once('.') {
        Some((i, f)) => (i, f),
        None => (body, ""),
    };
    if int.is_empty() && frac.is_empty() {
        return None;
    }
    if !int.bytes().all(|b| b.is_ascii_digit()) || !frac.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    if int.len() + frac.len() > 36 {
        return None;
    }
    let mut m: i128 = 0;
    for b in int.bytes().chain(frac.bytes()) {
        m = m * 10 + i128::from(b - b'0');
    }
    Some(Decimal {
        mantissa: if neg { -m } else { m },
        scale: frac.len() as u32,
    })
}

/// `d − offset`, computed exactly in decimal and then rounded once to f64.
pub fn shifted(d: Decimal, offset: i128) -> Option<f64> {
    let p = 10i128.checked_pow(d.scale)?;
    let diff = d.mantissa.checked_sub(offset.checked_mul(p)?)?;
    if d.scale <= 22 && diff.unsigned_abs() < (1u128 << 53) {
        // Both operands are exact in f64, so the quotient is correctly rounded.
        Some(diff as f64 / 10f64.powi(d.scale as i32))
    } else {
        format!("{diff}e-{}", d.scale).parse().ok()
    }
}

/// The integer part of `d` (toward zero), used as a column's offset.
pub fn integer_part(d: Decimal) -> i128 {
    d.mantissa / 10i128.pow(d.scale.min(36))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_plain_decimals_exactly() {
        assert_eq!(
            parse_decimal("-12.50"),
            Some(Decimal {
                mantissa: -1250,
                scale: 2
            })
        );
        assert_eq!(
            parse_decimal(".5"),
            Some(Decimal {
                mantissa: 5,
                scale: 1
            })
        );
        assert_eq!(parse_decimal("1e3"), None);
        assert_eq!(parse_decimal("."), None);
    }

    #[test]
    fn shifting_keeps_digits_an_f64_parse_loses() {
        // 1000000000000.4 as f64 is 1000000000000.4000244140625; shifted exactly it is 0.4.
        let d = parse_decimal("1000000000000.4").unwrap();
        assert_eq!(shifted(d, integer_part(d)), Some(0.4));
        assert_ne!("1000000000000.4".parse::<f64>().unwrap() - 1e12, 0.4);
    }
}
