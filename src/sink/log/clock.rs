//! Wall-clock time as the log writes it: RFC 3339 UTC with milliseconds, from a day count by
//! civil-calendar arithmetic (no time-zone data, no clock library).

use std::time::{SystemTime, UNIX_EPOCH};

/// Format `t` as RFC 3339 UTC with milliseconds, e.g. `2026-12-02T07:12:03.123Z` (rounded down
/// to the millisecond).
pub fn rfc3339_millis(t: SystemTime) -> String {
    // Milliseconds since the epoch, rounded down (before 1970 too: 1 ns before the epoch is
    // 23:59:59.999 of the day before).
    let ms: i128 = match t.duration_since(UNIX_EPOCH) {
        Ok(d) => (d.as_nanos() / 1_000_000) as i128,
        Err(e) => (-(e.duration().as_nanos() as i128)).div_euclid(1_000_000),
    };
    let days = ms.div_euclid(86_400_000) as i64;
    let in_day = ms.rem_euclid(86_400_000) as i64;
    let (y, m, d) = civil_from_days(days);
    let (hh, mm, ss, milli) = (
        in_day / 3_600_000,
        in_day / 60_000 % 60,
        in_day / 1000 % 60,
        in_day % 1000,
    );
    format!("{y:04}-{m:02}-{d:02}T{hh:02}:{mm:02}:{ss:02}.{milli:03}Z")
}

/// Proleptic Gregorian (year, month, day) of a day count from 1970-01-01.
///
/// Howard Hinnant's `civil_from_days`, from "chrono-Compatible Low-Level Date Algorithms"
/// (<https://howardhinnant.github.io/date_algorithms.html#civil_from_days>): shift the epoch to
/// 0000-03-01 so leap days end each year, split into 400-year eras of 146097 days, then find the
/// year of the era, the day of the year and the month from March (153 days per 5 months).
fn civil_from_days(days: i64) -> (i64, u32, u32) {
    let z = days + 719_468;
    let era = if z >= 0 { z } else { z - 146_096 } / 146_097;
    let doe = z - era * 146_097; // [0, 146096]
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365; // [0, 399]
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100); // [0, 365]
    let mp = (5 * doy + 2) / 153; // [0, 11], March = 0
    let d = doy - (153 * mp + 2) / 5 + 1; // [1, 31]
    let m = if mp < 10 { mp + 3 } else { mp - 9 }; // [1, 12]
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m as u32, d as u32)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::Duration;

    use crate::sink::log::testkit::BASE_MS;

    #[test]
    fn rfc3339_on_known_instants() {
        let at = |ms: u64| rfc3339_millis(UNIX_EPOCH + Duration::from_millis(ms));
        assert_eq!(at(0), "1970-01-01T00:00:00.000Z");
        // `date -u -d @951827696` = Tue Feb 29 12:34:56 UTC 2000 (a leap day of a /400 year).
        assert_eq!(at(951_827_696_789), "2000-02-29T12:34:56.789Z");
        assert_eq!(at(BASE_MS), "2026-12-02T07:12:03.123Z");
        // 2100 is not a leap year: 2100-03-01 follows 2100-02-28.
        assert_eq!(at(4_107_542_400_000), "2100-03-01T00:00:00.000Z");
        assert_eq!(at(4_107_542_400_000 - 1), "2100-02-28T23:59:59.999Z");
        // Rounded down to the millisecond, also before the epoch.
        assert_eq!(
            rfc3339_millis(UNIX_EPOCH + Duration::from_nanos(1_999_999)),
            "1970-01-01T00:00:00.001Z"
        );
        assert_eq!(
            rfc3339_millis(UNIX_EPOCH - Duration::from_nanos(1)),
            "1969-12-31T23:59:59.999Z"
        );
    }
}
