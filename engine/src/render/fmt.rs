//! Number formats: full-looking numbers for tables, the scientific-report style for sentences.

/// A table number: five significant digits, trailing zeros trimmed; scientific when very large
/// or very small. Non-finite values show as an em dash (they never reach a table as NaN).
pub fn num(x: f64) -> String {
    if !x.is_finite() {
        return "—".into();
    }
    if x == 0.0 {
        return "0".into();
    }
    let a = x.abs();
    if !(1e-4..1e9).contains(&a) {
        let s = format!("{x:.4e}");
        // 1.2340e6 → 1.234e6
        if let Some((m, e)) = s.split_once('e') {
            let m = trim_zeros(m);
            return format!("{m}e{e}");
        }
        return s;
    }
    let mag = a.log10().floor() as i32;
    let decimals = (4 - mag).clamp(0, 8) as usize;
    trim_zeros(&format!("{x:.decimals$}")).replace('-', "−")
}

/// Degrees of freedom: whole numbers plainly, fractional ones with two decimals.
pub fn df(x: f64) -> String {
    if (x - x.round()).abs() < 1e-9 {
        format!("{}", x.round() as i64)
    } else {
        format!("{x:.2}")
    }
}

/// Corrected (fractional) df in a sentence: whole numbers plainly, else two decimals below 10
/// and one from 10 (`F(2.10, 69.4)`).
pub fn df_corrected(x: f64) -> String {
    if (x - x.round()).abs() < 1e-9 {
        format!("{}", x.round() as i64)
    } else if x < 10.0 {
        format!("{x:.2}")
    } else {
        format!("{x:.1}")
    }
}

/// p in a table: four decimals, or "< .0001".
pub fn p_table(p: f64) -> String {
    if p < 0.0001 {
        "< .0001".into()
    } else {
        strip_lead(&format!("{p:.4}"))
    }
}

/// p in a report sentence: "p = .021", "p < .001".
pub fn p_report(p: f64) -> String {
    if p < 0.001 {
        "p < .001".into()
    } else if p > 0.999 {
        "p > .999".into()
    } else {
        format!("p = {}", strip_lead(&format!("{p:.3}")))
    }
}

/// An estimate in a sentence: three significant digits (`−0.81`, `1.23`, `412`).
pub fn est(x: f64) -> String {
    if !x.is_finite() {
        return "—".into();
    }
    if x == 0.0 {
        return "0".into();
    }
    let mag = x.abs().log10().floor() as i32;
    let decimals = (2 - mag).clamp(0, 10) as usize;
    format!("{x:.decimals$}").replace('-', "−")
}

/// A test statistic in a sentence: two decimals.
pub fn stat(x: f64) -> String {
    format!("{x:.2}").replace('-', "−")
}

/// An effect size bounded by 1 in a sentence: two decimals without the leading zero.
pub fn es(x: f64) -> String {
    strip_lead(&format!("{x:.2}")).replace('-', "−")
}

fn trim_zeros(s: &str) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s.to_string()
    }
}

fn strip_lead(s: &str) -> String {
    if let Some(r) = s.strip_prefix("0.") {
        format!(".{r}")
    } else if let Some(r) = s.strip_prefix("-0.") {
        format!("-.{r}")
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_numbers() {
        assert_eq!(num(1.5), "1.5");
        assert_eq!(num(123.456789), "123.46");
        assert_eq!(num(0.000123456), "0.00012346");
        assert_eq!(num(-2.0), "−2");
        assert_eq!(num(1.2345e12), "1.2345e12");
        assert_eq!(num(f64::NAN), "—");
    }

    #[test]
    fn report_style() {
        assert_eq!(p_report(0.0213), "p = .021");
        assert_eq!(p_report(0.0004), "p < .001");
        assert_eq!(p_table(0.00001), "< .0001");
        assert_eq!(p_table(0.5), ".5000");
        assert_eq!(es(0.127), ".13");
        assert_eq!(es(-0.02), "−.02");
        assert_eq!(stat(4.126), "4.13");
        assert_eq!(df(57.0), "57");
        assert_eq!(df(2.104), "2.10");
    }
}

/// The time now as a reader of a banner needs it: local time with its offset from UTC
/// ("10:42:13 UTC+01:00"), unambiguous in a notebook shared across time zones.
pub fn local_time() -> String {
    chrono::Local::now().format("%H:%M:%S UTC%:z").to_string()
}
