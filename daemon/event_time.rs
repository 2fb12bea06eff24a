//! Event time as text: the one place timestamps are parsed (historian CSV
//! rows, MQTT payloads) and written (alarm events, reports, the journal).
//!
//! Parsing accepts RFC 3339 (`2026-10-01T00:00:00Z`, fractions and offsets
//! allowed) and epoch numbers, seconds or milliseconds by magnitude
//! ([`EPOCH_MS_FROM`]). Writing gives RFC 3339 UTC with milliseconds. Pure:
//! no clock is read here.

/// Milliseconds in a day.
pub const MS_PER_DAY: i64 = 86_400_000;

/// The UTC day (days since the epoch) of an event time.
pub fn utc_day(t_ms: i64) -> i64 {
    t_ms.div_euclid(MS_PER_DAY)
}

/// RFC 3339 text for an event time in ms.
pub fn rfc3339_ms(ms: i64) -> String {
    chrono::DateTime::from_timestamp_millis(ms)
        .map(|t| t.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string())
        .unwrap_or_else(|| ms.to_string())
}

/// Days from 1970-01-01 to a civil date (proleptic Gregorian), after
/// H. Hinnant's `days_from_civil`.
fn days_from_civil(y: i64, m: i64, d: i64) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = if y >= 0 { y } else { y - 399 } / 400;
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

fn digits(b: &[u8]) -> Option<i64> {
    let mut v = 0i64;
    for &c in b {
        if !c.is_ascii_digit() {
            return None;
        }
        v = v * 10 + (c - b'0') as i64;
    }
    Some(v)
}

/// Epoch numbers at or above this are milliseconds, below it seconds
/// (1e11 s is the year 5138; 1e11 ms is 1973), as the MQTT decoder reads
/// numeric timestamps by magnitude.
pub const EPOCH_MS_FROM: f64 = 1e11;

/// Epoch milliseconds at or above this (the year 33658) are no time at all.
pub const EPOCH_MS_BEYOND: f64 = 1e15;

/// Parse an RFC 3339 timestamp or an epoch number (seconds, or
/// milliseconds by magnitude: see [`EPOCH_MS_FROM`]) to milliseconds.
pub fn parse_timestamp_ms(s: &str) -> Option<i64> {
    let b = s.as_bytes();
    if b.len() >= 20
        && b[4] == b'-'
        && b[7] == b'-'
        && (b[10] == b'T' || b[10] == b' ' || b[10] == b't')
        && b[13] == b':'
        && b[16] == b':'
    {
        let y = digits(&b[0..4])?;
        let mo = digits(&b[5..7])?;
        let d = digits(&b[8..10])?;
        let h = digits(&b[11..13])?;
        let mi = digits(&b[14..16])?;
        let se = digits(&b[17..19])?;
        if !(1..=12).contains(&mo) || !(1..=31).contains(&d) || h > 23 || mi > 59 || se > 60 {
            return None;
        }
        let mut i = 19;
        let mut frac_ms = 0i64;
        if b[i] == b'.' {
            i += 1;
            let start = i;
            while i < b.len() && b[i].is_ascii_digit() {
                i += 1;
            }
            if i == start {
                return None;
            }
            let f = &b[start..i.min(start + 3)];
            let mut v = digits(f)?;
            for _ in f.len()..3 {
                v *= 10;
            }
            frac_ms = v;
        }
        let offset_min = match b.get(i)? {
            b'Z' | b'z' if i + 1 == b.len() => 0,
            c @ (b'+' | b'-') if i + 6 == b.len() && b[i + 3] == b':' => {
                let oh = digits(&b[i + 1..i + 3])?;
                let om = digits(&b[i + 4..i + 6])?;
                let o = oh * 60 + om;
                if *c == b'+' {
                    o
                } else {
                    -o
                }
            }
            _ => return None,
        };
        let days = days_from_civil(y, mo, d);
        let secs = days * 86_400 + h * 3600 + mi * 60 + se - offset_min * 60;
        return Some(secs * 1000 + frac_ms);
    }
    // Epoch seconds or milliseconds (integer or decimal).
    if !b.is_empty() && b.iter().all(|c| c.is_ascii_digit() || *c == b'.' || *c == b'-') {
        let v: f64 = s.parse().ok()?;
        if v.is_finite() && v.abs() < EPOCH_MS_FROM {
            return Some((v * 1000.0).round() as i64);
        }
        if v.is_finite() && v.abs() < EPOCH_MS_BEYOND {
            return Some(v.round() as i64);
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timestamps() {
        // 2026-10-01T00:00:00Z is 1 790 812 800 s after the epoch
        // (checked with Python: datetime(2026,10,1,tzinfo=timezone.utc).timestamp()).
        assert_eq!(parse_timestamp_ms("2026-10-01T00:00:00Z"), Some(1_790_812_800_000));
        assert_eq!(parse_timestamp_ms("2026-10-01T02:00:00+02:00"), Some(1_790_812_800_000));
        assert_eq!(parse_timestamp_ms("2026-10-01T00:00:00.25Z"), Some(1_790_812_800_250));
        assert_eq!(parse_timestamp_ms("1790812800"), Some(1_790_812_800_000));
        assert_eq!(parse_timestamp_ms("1790812800.5"), Some(1_790_812_800_500));
        assert_eq!(parse_timestamp_ms("2026-13-01T00:00:00Z"), None);
        assert_eq!(parse_timestamp_ms("yesterday"), None);
        assert_eq!(parse_timestamp_ms("1970-01-01T00:00:00Z"), Some(0));
        assert_eq!(parse_timestamp_ms("2000-02-29T12:00:00Z"), Some(951_825_600_000));
    }

    #[test]
    fn timestamps_agree_with_chrono() {
        for s in ["1999-12-31T23:59:59Z", "2024-02-29T06:30:00.123Z", "2030-07-04T10:00:00-05:30"] {
            let c = chrono::DateTime::parse_from_rfc3339(s).unwrap().timestamp_millis();
            assert_eq!(parse_timestamp_ms(s), Some(c), "{s}");
        }
    }

    #[test]
    fn utc_text() {
        // 951 825 600 000 ms is 2000-02-29T12:00:00Z (leap day; Python:
        // datetime(2000,2,29,12,tzinfo=timezone.utc).timestamp()).
        assert_eq!(rfc3339_ms(951_825_600_000), "2000-02-29T12:00:00.000Z");
        assert_eq!(utc_day(-1), -1);
        assert_eq!(utc_day(951_825_600_000), 11_016);
    }
}
