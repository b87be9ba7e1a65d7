//! Value parsers shared by the command line and the configuration files: durations (`500ms`),
//! sizes (`10M`), channel lists (`1-8,12`) and frequency ranges (`20..20000`). Pure functions
//! with one error type; every message says what was wrong and how to write it.

use std::time::Duration;

/// A value that does not parse. Messages are one line.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum ParseError {
    /// A duration that does not parse or is not positive.
    #[error("bad duration '{value}': {reason}")]
    Duration {
        /// The text given.
        value: String,
        /// Why it was refused.
        reason: &'static str,
    },
    /// A size that does not parse.
    #[error("bad size '{0}': use a whole number with an optional k, M or G, e.g. 10M")]
    Size(String),
    /// A size past what 64 bits hold.
    #[error("size '{0}' is too large")]
    SizeTooLarge(String),
    /// A channel list that cannot be used.
    #[error("channel list '{spec}': {reason}")]
    Channels {
        /// The list as given.
        spec: String,
        /// What is wrong with it.
        reason: String,
    },
    /// A `LO..HI` range that cannot be used.
    #[error("'{value}': {reason}")]
    Range {
        /// The range as given.
        value: String,
        /// What is wrong with it.
        reason: String,
    },
}

const DURATION_FORM: &str = "expected a number with a unit ms, s or m, e.g. 500ms, 2s, 1.5s, 1m";

/// Parse a short duration: a plain decimal number with a unit `ms`, `s` or `m`, e.g. `500ms`,
/// `2s`, `1.5s`, `1m`. Zero, negative values, exponents and anything else are refused.
pub fn parse_duration(s: &str) -> Result<Duration, ParseError> {
    let bad = |reason| ParseError::Duration {
        value: s.to_string(),
        reason,
    };
    let t = s.trim();
    let (num, unit_secs) = if let Some(n) = t.strip_suffix("ms") {
        (n, 0.001)
    } else if let Some(n) = t.strip_suffix('s') {
        (n, 1.0)
    } else if let Some(n) = t.strip_suffix('m') {
        (n, 60.0)
    } else {
        return Err(bad(DURATION_FORM));
    };
    let num = num.trim_end();
    if num.starts_with('-') {
        return Err(bad("must be above zero"));
    }
    let digits_ok = !num.is_empty()
        && num.bytes().all(|b| b.is_ascii_digit() || b == b'.')
        && num.bytes().filter(|&b| b == b'.').count() <= 1
        && num.bytes().any(|b| b.is_ascii_digit());
    if !digits_ok {
        return Err(bad(DURATION_FORM));
    }
    let v: f64 = num.parse().map_err(|_| bad(DURATION_FORM))?;
    let d = Duration::try_from_secs_f64(v * unit_secs).map_err(|_| bad("too long"))?;
    if d.is_zero() {
        return Err(bad("must be above zero"));
    }
    Ok(d)
}

/// Parse a size with an optional k/M/G suffix (powers of 1024).
pub fn parse_size(s: &str) -> Result<u64, ParseError> {
    let t = s.trim();
    let (num, mult) = match t.chars().last() {
        Some('k' | 'K') => (&t[..t.len() - 1], 1u64 << 10),
        Some('m' | 'M') => (&t[..t.len() - 1], 1 << 20),
        Some('g' | 'G') => (&t[..t.len() - 1], 1 << 30),
        _ => (t, 1),
    };
    match num.parse::<u64>() {
        Ok(n) if n > 0 => n
            .checked_mul(mult)
            .ok_or_else(|| ParseError::SizeTooLarge(s.to_string())),
        _ => Err(ParseError::Size(s.to_string())),
    }
}

/// Parse a channel list such as `1-8,12` against an input of `available` channels: channel
/// numbers as people write them (from 1), ascending, each once. Subtract 1 to index a frame.
pub fn parse_channels(spec: &str, available: usize) -> Result<Vec<usize>, ParseError> {
    let fail = |reason: String| ParseError::Channels {
        spec: spec.to_owned(),
        reason,
    };
    if available == 0 {
        return Err(fail("the input has no channels".into()));
    }
    if spec.trim().is_empty() {
        return Err(fail("it is empty; write e.g. 1-8,12".into()));
    }
    let number = |s: &str| -> Result<usize, ParseError> {
        let s = s.trim();
        let n: usize = s
            .parse()
            .map_err(|_| fail(format!("'{s}' is not a channel number")))?;
        if n == 0 {
            return Err(fail("channels are numbered from 1".into()));
        }
        if n > available {
            let s = if available == 1 { "" } else { "s" };
            return Err(fail(format!(
                "channel {n} is beyond the input's {available} channel{s}"
            )));
        }
        Ok(n)
    };
    let mut out = Vec::new();
    for item in spec.split(',') {
        let item = item.trim();
        if item.is_empty() {
            return Err(fail("an item is empty (two commas in a row?)".into()));
        }
        match item.split_once('-') {
            Some((a, b)) => {
                let (lo, hi) = (number(a)?, number(b)?);
                if lo > hi {
                    return Err(fail(format!("range {lo}-{hi} runs backwards")));
                }
                out.extend(lo..=hi);
            }
            None => out.push(number(item)?),
        }
    }
    out.sort_unstable();
    out.dedup();
    Ok(out)
}

/// Parse a frequency range `LO..HI` (Hz), `0 < LO < HI`.
pub fn parse_range(s: &str) -> Result<(f64, f64), ParseError> {
    let fail = |reason: String| ParseError::Range {
        value: s.to_string(),
        reason,
    };
    let (lo, hi) = s
        .split_once("..")
        .ok_or_else(|| fail("write LO..HI in Hz, e.g. 20..20000".into()))?;
    let num = |v: &str| {
        v.trim()
            .parse::<f64>()
            .map_err(|_| fail(format!("'{}' is not a number", v.trim())))
    };
    let (lo, hi) = (num(lo)?, num(hi)?);
    if !(lo > 0.0 && hi > lo && hi.is_finite()) {
        return Err(fail("need 0 < LO < HI".into()));
    }
    Ok((lo, hi))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durations_parse() {
        assert_eq!(parse_duration("500ms").unwrap(), Duration::from_millis(500));
        assert_eq!(parse_duration("2s").unwrap(), Duration::from_secs(2));
        assert_eq!(parse_duration("1.5s").unwrap(), Duration::from_millis(1500));
        assert_eq!(parse_duration("1m").unwrap(), Duration::from_secs(60));
        assert_eq!(parse_duration(" 0.25m ").unwrap(), Duration::from_secs(15));
        assert_eq!(parse_duration(".5s").unwrap(), Duration::from_millis(500));
    }

    #[test]
    fn durations_refused_with_reason() {
        let e = |s: &str| parse_duration(s).unwrap_err().to_string();
        assert_eq!(e("0s"), "bad duration '0s': must be above zero");
        assert_eq!(e("0.0ms"), "bad duration '0.0ms': must be above zero");
        assert_eq!(e("-1s"), "bad duration '-1s': must be above zero");
        let garbage = "expected a number with a unit ms, s or m, e.g. 500ms, 2s, 1.5s, 1m";
        for s in [
            "2", "abc", "s", "1e3s", "1.2.3s", "2h", ".s", "inf s", "1 2s", "",
        ] {
            assert_eq!(e(s), format!("bad duration '{s}': {garbage}"), "for {s:?}");
        }
    }

    #[test]
    fn sizes_take_binary_suffixes() {
        assert_eq!(parse_size("500"), Ok(500));
        assert_eq!(parse_size("500k"), Ok(500 << 10));
        assert_eq!(parse_size("10M"), Ok(10 << 20));
        assert_eq!(parse_size(" 1g "), Ok(1 << 30));
        let e = |s: &str| parse_size(s).unwrap_err().to_string();
        let form = "use a whole number with an optional k, M or G, e.g. 10M";
        for s in ["0", "", "k", "1.5M", "-1k", "10T"] {
            assert_eq!(e(s), format!("bad size '{s}': {form}"), "for {s:?}");
        }
        assert_eq!(
            e("99999999999999999G"),
            "size '99999999999999999G' is too large"
        );
    }

    #[test]
    fn channel_lists_are_sorted_unique_and_bounded() {
        assert_eq!(
            parse_channels("1-8,12", 16),
            Ok((1..=8).chain([12]).collect())
        );
        assert_eq!(parse_channels(" 3, 1 ,2-3,1", 4), Ok(vec![1, 2, 3]));
        assert_eq!(parse_channels("2", 2), Ok(vec![2]));
        let err = |s, n| parse_channels(s, n).map_err(|e| e.to_string());
        assert_eq!(
            err("1-9", 8),
            Err("channel list '1-9': channel 9 is beyond the input's 8 channels".into())
        );
        assert_eq!(
            err("2", 1),
            Err("channel list '2': channel 2 is beyond the input's 1 channel".into())
        );
        assert_eq!(
            err("0-2", 8),
            Err("channel list '0-2': channels are numbered from 1".into())
        );
        assert_eq!(
            err("5-2", 8),
            Err("channel list '5-2': range 5-2 runs backwards".into())
        );
        assert_eq!(
            err("1,,2", 8),
            Err("channel list '1,,2': an item is empty (two commas in a row?)".into())
        );
        assert_eq!(
            err("left", 8),
            Err("channel list 'left': 'left' is not a channel number".into())
        );
        assert_eq!(
            err("1-", 8),
            Err("channel list '1-': '' is not a channel number".into())
        );
        assert_eq!(
            err("-3", 8),
            Err("channel list '-3': '' is not a channel number".into())
        );
        assert_eq!(
            err("", 8),
            Err("channel list '': it is empty; write e.g. 1-8,12".into())
        );
        assert_eq!(
            err("1", 0),
            Err("channel list '1': the input has no channels".into())
        );
        assert_eq!(
            err("1-99999999999999999999", 8),
            Err("channel list '1-99999999999999999999': '99999999999999999999' is not a channel number".into())
        );
    }

    #[test]
    fn ranges_need_two_rising_numbers() {
        assert_eq!(parse_range("20..20000"), Ok((20.0, 20000.0)));
        assert_eq!(parse_range(" 20 .. 40 "), Ok((20.0, 40.0)));
        let e = |s: &str| parse_range(s).unwrap_err().to_string();
        assert_eq!(
            e("20-20000"),
            "'20-20000': write LO..HI in Hz, e.g. 20..20000"
        );
        assert_eq!(e("a..20"), "'a..20': 'a' is not a number");
        assert_eq!(e("200..20"), "'200..20': need 0 < LO < HI");
        assert_eq!(e("0..20"), "'0..20': need 0 < LO < HI");
    }
}
