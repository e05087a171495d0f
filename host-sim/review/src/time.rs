//! Calendar helpers. Device clocks in the fleet count UTC seconds since 1970-01-01 (a `u32`
//! lasts to 2106); the review needs the calendar year of a storm and readable stamps.

/// Days from 1970-01-01 to a civil date (proleptic Gregorian; H. Hinnant's
/// `days_from_civil`).
pub fn days_from_civil(y: i64, m: i64, d: i64) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// Civil date `(year, month, day)` of a day count from 1970-01-01 (H. Hinnant's
/// `civil_from_days`).
pub fn civil_from_days(z: i64) -> (i64, i64, i64) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    (if m <= 2 { y + 1 } else { y }, m, d)
}

/// Calendar year (UTC) of a device time stamp.
pub fn year_of(time_s: u32) -> i32 {
    civil_from_days(i64::from(time_s).div_euclid(86_400)).0 as i32
}

/// Device seconds of 00:00 UTC on 1 January of `year` (0 before 1970, `u32::MAX` after 2105).
pub fn start_of_year_s(year: i32) -> u32 {
    let s = days_from_civil(i64::from(year), 1, 1) * 86_400;
    s.clamp(0, i64::from(u32::MAX)) as u32
}

/// `YYYY-MM-DD HH:MM` (UTC) of a device time stamp.
pub fn stamp(time_s: u32) -> String {
    let t = i64::from(time_s);
    let (y, m, d) = civil_from_days(t.div_euclid(86_400));
    let s = t.rem_euclid(86_400);
    format!(
        "{y:04}-{m:02}-{d:02} {:02}:{:02}",
        s / 3600,
        (s % 3600) / 60
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 2000-03-01 is day 11017 after 1970-01-01 (Hinnant's paper, worked example), and the
    /// two functions are inverse over four centuries of days.
    #[test]
    fn civil_round_trip_and_known_day() {
        assert_eq!(days_from_civil(2000, 3, 1), 11_017);
        assert_eq!(days_from_civil(1970, 1, 1), 0);
        for z in (-50_000..100_000).step_by(37) {
            let (y, m, d) = civil_from_days(z);
            assert_eq!(days_from_civil(y, m, d), z);
        }
        assert_eq!(year_of(start_of_year_s(2025)), 2025);
        assert_eq!(year_of(start_of_year_s(2025) - 1), 2024);
        assert_eq!(stamp(86_400 + 3_660), "1970-01-02 01:01");
    }
}
