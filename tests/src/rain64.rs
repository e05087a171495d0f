//! f64 references for the rain checks, written from the definitions and published formulas,
//! independent of the f32 core.
//!
//! - IDF forms, t in minutes, i in mm/h: Talbot `i = a/(t+b)`, Sherman `i = a/(t+b)^c`,
//!   power law `i = a·t^(−b)`.
//! - Log–log interpolation on a grid: `ln i` linear in `ln t` and in `ln T`.
//! - Rolling window depth over interval totals: the sum of totals whose interval end lies in
//!   `(t − W, t]`, maximised over interval ends `t` (the definition of a sliding-window
//!   total on interval data).
//! - Readers for the recorded excerpt under `data/rain/`.

use std::path::PathBuf;

/// Talbot `i = a / (t + b)`, mm/h.
pub fn talbot(a: f64, b: f64, t_min: f64) -> f64 {
    a / (t_min + b)
}

/// Sherman `i = a / (t + b)^c`, mm/h.
pub fn sherman(a: f64, b: f64, c: f64, t_min: f64) -> f64 {
    a / (t_min + b).powf(c)
}

/// Power law `i = a · t^(−b)`, mm/h.
pub fn power_law(a: f64, b: f64, t_min: f64) -> f64 {
    a * t_min.powf(-b)
}

/// `ln y` linear in `ln x` through two points.
pub fn loglog(x: f64, x0: f64, x1: f64, y0: f64, y1: f64) -> f64 {
    let f = (x.ln() - x0.ln()) / (x1.ln() - x0.ln());
    (y0.ln() + f * (y1.ln() - y0.ln())).exp()
}

/// Log–log interpolation in a table `cells[row][col]` over `rows` (durations) and `cols`
/// (return periods), `x` and `y` inside the table.
pub fn table_loglog(rows: &[f64], cols: &[f64], cells: &[Vec<f64>], x: f64, y: f64) -> f64 {
    let j = (0..rows.len() - 1)
        .find(|&j| x <= rows[j + 1])
        .unwrap_or(rows.len() - 2);
    let k = (0..cols.len() - 1)
        .find(|&k| y <= cols[k + 1])
        .unwrap_or(cols.len() - 2);
    let at = |kk: usize| loglog(x, rows[j], rows[j + 1], cells[j][kk], cells[j + 1][kk]);
    loglog(y, cols[k], cols[k + 1], at(k), at(k + 1))
}

/// Path of a file under `tests/data/`.
pub fn data_path(rel: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("data")
        .join(rel)
}

/// Days from 1970-01-01 to a civil date (proleptic Gregorian; H. Hinnant's `days_from_civil`).
fn days_from_civil(y: i64, m: i64, d: i64) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// Seconds from 2017-01-01 00:00 (same clock) to a `YYYY-MM-DD HH:MM:SS` stamp, rounded to
/// the nearest 5 minutes (the Singapore source stamps at hh:m4:59 or hh:m5:00).
pub fn stamp_s_rounded_5min(stamp: &str) -> Result<i64, String> {
    let num = |a: usize, b: usize| -> Result<i64, String> {
        stamp
            .get(a..b)
            .and_then(|s| s.parse().ok())
            .ok_or_else(|| format!("bad stamp {stamp:?}"))
    };
    let days = days_from_civil(num(0, 4)?, num(5, 7)?, num(8, 10)?) - days_from_civil(2017, 1, 1);
    let s = days * 86_400 + num(11, 13)? * 3600 + num(14, 16)? * 60 + num(17, 19)?;
    Ok((s + 150).div_euclid(300) * 300)
}

/// The S117 excerpt as `(interval end s since 2017-01-01 SGT, depth mm)`, in time order.
pub fn load_sg_excerpt() -> Result<Vec<(i64, f64)>, String> {
    let p = data_path("rain/sg_s117_storms.csv");
    let text = std::fs::read_to_string(&p).map_err(|e| format!("{}: {e}", p.display()))?;
    let mut out = Vec::new();
    for line in text.lines().skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        if cells.len() != 3 {
            return Err(format!("bad row {line:?}"));
        }
        let mm: f64 = cells[1].parse().map_err(|e| format!("{line:?}: {e}"))?;
        out.push((stamp_s_rounded_5min(cells[2])?, mm));
    }
    Ok(out)
}

/// Largest sum of totals whose end lies in `(t − window_s, t]`, over the ends `t` of `rows`.
pub fn max_window_depth(rows: &[(i64, f64)], window_s: i64) -> f64 {
    rows.iter()
        .map(|&(t, _)| {
            rows.iter()
                .filter(|&&(u, _)| u > t - window_s && u <= t)
                .map(|r| r.1)
                .sum()
        })
        .fold(0.0, f64::max)
}

/// Storms: runs of wet rows split where the dry time between wet interval ends is ≥ `dry_s`;
/// each storm is returned as the rows from its first to its last wet row.
pub fn storms(rows: &[(i64, f64)], dry_s: i64) -> Vec<Vec<(i64, f64)>> {
    let mut out: Vec<Vec<(i64, f64)>> = Vec::new();
    let mut last_wet: Option<i64> = None;
    for &(t, mm) in rows {
        if mm > 0.0 {
            if last_wet.is_none_or(|l| t - l >= dry_s) {
                out.push(Vec::new());
            }
            last_wet = Some(t);
        }
        if let (Some(s), Some(_)) = (out.last_mut(), last_wet) {
            s.push((t, mm));
        }
    }
    for s in &mut out {
        while s.last().is_some_and(|r| r.1 == 0.0) {
            s.pop();
        }
    }
    out
}

/// Seconds from 2010-01-01T00:00Z to a `YYYY-MM-DDTHH:MMZ` stamp.
pub fn stamp_s_since_2010(stamp: &str) -> Result<i64, String> {
    let num = |a: usize, b: usize| -> Result<i64, String> {
        stamp
            .get(a..b)
            .and_then(|s| s.parse().ok())
            .ok_or_else(|| format!("bad stamp {stamp:?}"))
    };
    let days = days_from_civil(num(0, 4)?, num(5, 7)?, num(8, 10)?) - days_from_civil(2010, 1, 1);
    Ok(days * 86_400 + num(11, 13)? * 3600 + num(14, 16)? * 60)
}

/// The Görlitz July 2010 excerpt as `(step end s since 2010-01-01Z, depth mm)`, taking each
/// stamp as the start of its 5-min step; only wet steps are listed.
pub fn load_dwd_excerpt() -> Result<Vec<(i64, f64)>, String> {
    let p = data_path("rain/dwd_01684_goerlitz_2010-07-17.csv");
    let text = std::fs::read_to_string(&p).map_err(|e| format!("{}: {e}", p.display()))?;
    let mut out = Vec::new();
    for line in text.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        if cells.len() != 3 || cells[1] != "5" {
            return Err(format!("unexpected row {line:?}"));
        }
        let mm: f64 = cells[2].parse().map_err(|e| format!("{line:?}: {e}"))?;
        out.push((stamp_s_since_2010(cells[0])? + 300, mm));
    }
    Ok(out)
}
