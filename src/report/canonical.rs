//! JSON Canonicalization Scheme (RFC 8785): the exact bytes a signature covers.
//!
//! Objects have their members sorted by the UTF-16 code units of their names, no whitespace
//! is written, strings use the minimal escapes of ECMAScript's `JSON.stringify`, and numbers
//! are written as ECMAScript's Number-to-String writes an IEEE-754 double (shortest
//! round-trip digits; plain notation for exponents from −6 to 20, `d.ddde±x` otherwise).

use serde_json::Value;

/// Why a value has no canonical form.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CanonicalError {
    /// NaN and infinities are not JSON numbers.
    #[error("the value holds a number JSON cannot carry: {0}")]
    NotFinite(f64),
    /// An integer too large to be an exact double.
    #[error("integer {0} is beyond the range RFC 8785 can represent exactly")]
    Integer(String),
}

/// The canonical bytes of a JSON value.
///
/// # Errors
/// A non-finite number or an integer beyond ±2⁵³.
pub fn canonical_bytes(v: &Value) -> Result<Vec<u8>, CanonicalError> {
    let mut out = String::new();
    write_value(&mut out, v)?;
    Ok(out.into_bytes())
}

fn write_value(out: &mut String, v: &Value) -> Result<(), CanonicalError> {
    match v {
        Value::Null => out.push_str("null"),
        Value::Bool(b) => out.push_str(if *b { "true" } else { "false" }),
        Value::Number(n) => {
            let x = if let Some(i) = n.as_i64() {
                if i.unsigned_abs() > 1 << 53 {
                    return Err(CanonicalError::Integer(i.to_string()));
                }
                i as f64
            } else if let Some(u) = n.as_u64() {
                if u > 1 << 53 {
                    return Err(CanonicalError::Integer(u.to_string()));
                }
                u as f64
            } else {
                n.as_f64().unwrap_or(f64::NAN)
            };
            out.push_str(&number(x)?);
        }
        Value::String(s) => write_string(out, s),
        Value::Array(a) => {
            out.push('[');
            for (i, x) in a.iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                write_value(out, x)?;
            }
            out.push(']');
        }
        Value::Object(m) => {
            let mut keys: Vec<&String> = m.keys().collect();
            keys.sort_by(|a, b| a.encode_utf16().cmp(b.encode_utf16()));
            out.push('{');
            for (i, k) in keys.iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                write_string(out, k);
                out.push(':');
                write_value(out, &m[*k])?;
            }
            out.push('}');
        }
    }
    Ok(())
}

fn write_string(out: &mut String, s: &str) {
    out.push('"');
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\u{8}' => out.push_str("\\b"),
            '\u{c}' => out.push_str("\\f"),
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            '\t' => out.push_str("\\t"),
            c if (c as u32) < 0x20 => out.push_str(&format!("\\u{:04x}", c as u32)),
            c => out.push(c),
        }
    }
    out.push('"');
}

/// ECMAScript's Number-to-String for a finite double (RFC 8785 §3.2.2.3).
///
/// # Errors
/// NaN or an infinity.
pub fn number(x: f64) -> Result<String, CanonicalError> {
    if !x.is_finite() {
        return Err(CanonicalError::NotFinite(x));
    }
    if x == 0.0 {
        return Ok("0".into());
    }
    // Rust's `{:e}` gives the shortest round-trip digits: "d.ddde-x".
    let sci = format!("{:e}", x.abs());
    let (mantissa, exp) = sci.split_once('e').unwrap_or((&sci, "0"));
    let mut digits: String = mantissa.chars().filter(|c| c.is_ascii_digit()).collect();
    let e: i32 = exp.parse().unwrap_or(0);
    even_tie(&mut digits, e, x.abs());
    let k = digits.len() as i32;
    // Value = 0.d1d2…dk × 10^n.
    let n = e + 1;
    let body = if k <= n && n <= 21 {
        format!("{digits}{}", "0".repeat((n - k) as usize))
    } else if 0 < n && n <= 21 {
        format!("{}.{}", &digits[..n as usize], &digits[n as usize..])
    } else if -6 < n && n <= 0 {
        format!("0.{}{digits}", "0".repeat((-n) as usize))
    } else {
        let sign = if n - 1 < 0 { '-' } else { '+' };
        if k == 1 {
            format!("{digits}e{sign}{}", (n - 1).abs())
        } else {
            format!("{}.{}e{sign}{}", &digits[..1], &digits[1..], (n - 1).abs())
        }
    };
    Ok(if x < 0.0 { format!("-{body}") } else { body })
}

/// ECMAScript breaks an exact tie between two shortest digit strings towards the even last
/// digit; Rust's shortest formatting may pick the other. `digits` are the shortest digits of
/// `x = 0.d1…dk × 10^(e+1)`; when a neighbour one unit away in the last digit also reads back
/// as `x` and the exact binary value lies exactly halfway, keep the even one.
fn even_tie(digits: &mut String, e: i32, x: f64) {
    let k = digits.len();
    let Some(last) = digits.as_bytes().last().map(|b| b - b'0') else {
        return;
    };
    if last % 2 == 0 {
        return;
    }
    let exact = format!("{:.800e}", x);
    let Some((m, ex)) = exact.split_once('e') else {
        return;
    };
    if ex.parse::<i32>().ok() != Some(e) {
        return;
    }
    let exact_digits: String = m.chars().filter(|c| c.is_ascii_digit()).collect();
    for step in [-1i32, 1] {
        let nd = last as i32 + step;
        if !(0..=9).contains(&nd) {
            continue;
        }
        let mut candidate = digits[..k - 1].to_string();
        candidate.push(char::from(b'0' + nd as u8));
        let parsed: Option<f64> = format!("{}.{}e{}", &candidate[..1], &candidate[1..], e)
            .parse()
            .ok();
        if parsed != Some(x) {
            continue;
        }
        let lower = if step < 0 { &candidate } else { &*digits };
        let tie = exact_digits.starts_with(lower.as_str())
            && exact_digits[k..].starts_with('5')
            && exact_digits[k + 1..].bytes().all(|b| b == b'0');
        if tie {
            *digits = candidate;
            return;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rfc8785_section_3_2_3_example() {
        // RFC 8785 §3.2.3 (from memory of the RFC): the input with odd number and string
        // spellings and its canonical form.
        let input = r#"{"numbers":[333333333.33333329,1E30,4.50,2e-3,0.000000000000000000000000001],"string":"\u20ac$\u000F\u000aA'\u0042\u0022\u005c\\\"\/","literals":[null,true,false]}"#;
        let v: Value = serde_json::from_str(input).unwrap();
        let out = String::from_utf8(canonical_bytes(&v).unwrap()).unwrap();
        assert_eq!(
            out,
            r#"{"literals":[null,true,false],"numbers":[333333333.3333333,1e+30,4.5,0.002,1e-27],"string":"€$\u000f\nA'B\"\\\\\"/"}"#
        );
    }

    #[test]
    fn rfc8785_member_sorting_by_utf16() {
        // RFC 8785 §3.2.3 sorting example (from memory): UTF-16 order puts the emoji
        // (a surrogate pair, D83D DE00) before U+FB33.
        let input = r#"{"\u20ac":"Euro Sign","\r":"Carriage Return","\ufb33":"Hebrew Letter Dalet With Dagesh","1":"One","\ud83d\ude00":"Emoji: Grinning Face","\u0080":"Control","\u00f6":"Latin Small Letter O With Diaeresis"}"#;
        let v: Value = serde_json::from_str(input).unwrap();
        let out = String::from_utf8(canonical_bytes(&v).unwrap()).unwrap();
        let order: Vec<&str> = ["\r", "1", "\u{80}", "ö", "€", "😀", "\u{fb33}"].to_vec();
        let mut last = 0;
        for k in order {
            let at = out
                .find(&format!("\"{}\":", k.replace('\r', "\\r")))
                .unwrap();
            assert!(at >= last, "{k:?} out of order in {out}");
            last = at;
        }
    }

    #[test]
    fn numbers_match_ecmascript_for_the_node_fixture() {
        // tests/fixtures/jcs_numbers.json: doubles with Node's String(x), generated by the
        // committed make_jcs_numbers.js (includes RFC 8785 Appendix B's edge values).
        let text = std::fs::read_to_string(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/fixtures/jcs_numbers.json"
        ))
        .unwrap();
        let v: Value = serde_json::from_str(&text).unwrap();
        let cases = v["cases"].as_array().unwrap();
        assert!(cases.len() >= 3000);
        for c in cases {
            let bits = u64::from_str_radix(c[0].as_str().unwrap(), 16).unwrap();
            let x = f64::from_bits(bits);
            assert_eq!(
                number(x).unwrap(),
                c[1].as_str().unwrap(),
                "bits {bits:016x}"
            );
        }
    }

    #[test]
    fn non_finite_numbers_are_refused() {
        assert!(number(f64::NAN).is_err());
        assert!(number(f64::INFINITY).is_err());
    }
}
