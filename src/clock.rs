//! Wall-clock time as text, for reports and lock labels (no time-zone database needed: UTC).

fn now_s() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs())
}

/// Now as `YYYY-MM-DD HH:MM UTC`.
pub fn utc_now() -> String {
    utc_text(now_s())
}

/// Now as `YYYYMMDD-HHMMSS` (UTC), for file names.
pub fn utc_file_stamp() -> String {
    let (y, mo, d, s) = civil(now_s());
    format!(
        "{y:04}{mo:02}{d:02}-{:02}{:02}{:02}",
        s / 3600,
        s % 3600 / 60,
        s % 60
    )
}

/// Seconds since 1970 as `YYYY-MM-DD HH:MM UTC`.
pub fn utc_text(unix_s: u64) -> String {
    let (year, month, day, rem) = civil(unix_s);
    format!(
        "{year:04}-{month:02}-{day:02} {:02}:{:02} UTC",
        rem / 3600,
        rem % 3600 / 60
    )
}

/// Year, month, day and seconds into the day of a Unix time (days to civil date: Hinnant's
/// algorithm).
fn civil(unix_s: u64) -> (i64, i64, i64, u64) {
    let days = (unix_s / 86_400) as i64;
    let rem = unix_s % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    (year, month, day, rem)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Civil dates from day counts (Hinnant, "chrono-Compatible Low-Level Date Algorithms", 2013):
    /// the Unix epoch; 2000-03-01 (day 11017, after the leap day of a century year divisible by
    /// 400); 2026-12-02 12:34 UTC = 1796214840 s (date(1) -u -d).
    #[test]
    fn known_dates() {
        assert_eq!(utc_text(0), "1970-01-01 00:00 UTC");
        assert_eq!(utc_text(11_017 * 86_400), "2000-03-01 00:00 UTC");
        assert_eq!(utc_text(1_796_214_840), "2026-12-02 12:34 UTC");
    }
}
