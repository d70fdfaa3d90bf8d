//! Numbers for people (text reports) and for programs (CSV): text rounds a
//! value to what its uncertainty supports and never prints "e0" or
//! floating-point noise; CSV keeps full precision in a form that any
//! reader parses.

/// A number for text with `sig` significant figures: plain decimals from
/// 1e-3 to 1e5, otherwise scientific ("6.57e-11"), never "3e0" or
/// "8.400000000000001e-6".
pub fn sig(v: f64, sig: usize) -> String {
    if !v.is_finite() {
        return v.to_string();
    }
    if v == 0.0 {
        return "0".into();
    }
    let sig = sig.max(1);
    let exponent = v.abs().log10().floor() as i32;
    if (-3..5).contains(&exponent) {
        let decimals = (sig as i32 - 1 - exponent).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.*e}", sig - 1)
    }
}

/// A number for text at up to 6 significant figures with trailing zeros
/// dropped, for inputs and exact derived values: 0.001 → "0.001",
/// 3.0000000000000004 → "3", 1e-9 → "1e-9".
pub fn short(v: f64) -> String {
    let text = sig(v, 6);
    let (mantissa, exponent) = match text.split_once('e') {
        Some((m, e)) => (m.to_string(), format!("e{e}")),
        None => (text.clone(), String::new()),
    };
    let mantissa = if mantissa.contains('.') {
        mantissa
            .trim_end_matches('0')
            .trim_end_matches('.')
            .to_string()
    } else {
        mantissa
    };
    format!("{mantissa}{exponent}")
}

/// A value and its 95 % interval for text, rounded together to two
/// significant figures of the interval's half-width: "0.640 [0.611, 0.669]".
pub fn with_interval(v: f64, ci: [f64; 2]) -> String {
    let half = 0.5 * (ci[1] - ci[0]).abs();
    if !(half > 0.0 && half.is_finite() && v.is_finite() && v != 0.0) {
        return format!("{} [{}, {}]", sig(v, 4), sig(ci[0], 4), sig(ci[1], 4));
    }
    // Digits of v down to the second significant digit of the half-width.
    let figures = (v.abs().log10().floor() - half.log10().floor() + 2.0).clamp(1.0, 12.0) as usize;
    let place = v.abs().log10().floor() as i32;
    let at = |x: f64| {
        // Bounds take the value's decimal place so the three line up.
        let digits = (figures as i32 - (place - x.abs().log10().floor() as i32)).max(1) as usize;
        sig(x, digits)
    };
    format!("{} [{}, {}]", sig(v, figures), at(ci[0]), at(ci[1]))
}

/// A number for CSV: the shortest text that reads back to the same f64,
/// plain decimals from 1e-4 to 1e6 and scientific otherwise.
pub fn csv(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return v.to_string();
    }
    let a = v.abs();
    if (1e-4..1e6).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

/// A snake_case identifier of a text: lower-case ASCII letters and digits,
/// Greek letters spelled out, everything else an underscore, runs joined.
pub fn snake(text: &str) -> String {
    let mut out = String::new();
    for c in text.chars() {
        let piece: String = match c {
            'φ' => "phi".into(),
            'λ' => "lambda".into(),
            'σ' => "sigma".into(),
            'ε' => "eps".into(),
            'Φ' => "partition".into(),
            '∥' => "par".into(),
            c if c.is_ascii_alphanumeric() => c.to_ascii_lowercase().to_string(),
            _ => "_".into(),
        };
        if piece == "_" {
            if !out.is_empty() && !out.ends_with('_') {
                out.push('_');
            }
        } else {
            if piece.len() > 1 && !out.is_empty() && !out.ends_with('_') {
                out.push('_');
            }
            out.push_str(&piece);
        }
    }
    out.trim_end_matches('_').to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_numbers_have_no_noise() {
        assert_eq!(sig(3.0, 3), "3.00");
        assert_eq!(sig(8.400000000000001e-6, 3), "8.40e-6");
        assert_eq!(sig(3.9999999999999996e-5, 2), "4.0e-5");
        assert_eq!(sig(0.0, 3), "0");
        assert_eq!(sig(123456.0, 3), "1.23e5");
        assert_eq!(sig(0.6398, 3), "0.640");
    }

    #[test]
    fn short_numbers_drop_trailing_zeros() {
        assert_eq!(short(0.001), "0.001");
        assert_eq!(short(3.0000000000000004), "3");
        assert_eq!(short(1e-9), "1e-9");
        assert_eq!(short(2.5e-10), "2.5e-10");
        assert_eq!(short(300000.0), "3e5");
    }

    #[test]
    fn intervals_round_to_their_uncertainty() {
        assert_eq!(
            with_interval(0.6398, [0.6111, 0.6686]),
            "0.640 [0.611, 0.669]"
        );
        assert_eq!(
            with_interval(5.2302e-11, [4.9959e-11, 5.4646e-11]),
            "5.23e-11 [5.00e-11, 5.46e-11]"
        );
    }

    #[test]
    fn csv_numbers_read_back_exactly() {
        for v in [0.9415565207618122, 6.69693233921561e-11, 1e-5, 2.5e6, -3.0] {
            assert_eq!(csv(v).parse::<f64>().unwrap(), v);
        }
        assert_eq!(csv(0.9415565207618122), "0.9415565207618122");
        assert!(!csv(6.69693233921561e-11).contains("0.0000"));
    }

    #[test]
    fn snake_names() {
        assert_eq!(
            snake("Maxwell tracer 2/(2+φ_excl)"),
            "maxwell_tracer_2_2_phi_excl"
        );
        assert_eq!(
            snake("this engine's wall model ⟨D∥⟩/D0"),
            "this_engine_s_wall_model_d_par_d0"
        );
    }
}
