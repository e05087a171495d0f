//! Rain for the storm summaries: interval totals from the log's `RainTotal` records, or from
//! a rain CSV when the log carries none.
//!
//! **What the log must carry for rain statistics.** The devices log
//! `EventBody::RainTotal { window_s, depth_mm }`: the depth the gauge counted over the
//! `window_s` seconds ending at the record's time, at least once per wet interval (dry
//! intervals may be left out: an interval not logged counts as 0 mm). Intervals of 1 to 5 min
//! give peak intensities down to that duration. `Sample` records carry no rain; a log
//! without `RainTotal` records needs an accompanying rain CSV, else storms have no depth
//! and no return period (the summary says so; it never guesses).
//!
//! Rain CSV (our own): a header line `time_s,window_s,depth_mm`, then one row per interval:
//! `time_s` = interval end on the device clock (UTC seconds since 1970), `window_s` > 0,
//! `depth_mm` ≥ 0. Lines starting with `#` are comments.

use std::path::Path;

use holdback_core::event::{EventBody, EventRecord};

use crate::error::ReviewError;

/// One rain interval total.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RainInterval {
    /// Interval end, device seconds.
    pub end_s: u32,
    /// Interval length, s.
    pub window_s: u32,
    /// Depth in it, mm.
    pub depth_mm: f32,
}

impl RainInterval {
    /// Interval start, s.
    pub fn start_s(&self) -> u32 {
        self.end_s.saturating_sub(self.window_s)
    }
}

/// The `RainTotal` records of a log, as intervals in time order (non-finite, negative or
/// zero-length ones left out).
pub fn from_records(records: &[EventRecord]) -> Vec<RainInterval> {
    let mut v: Vec<RainInterval> = records
        .iter()
        .filter_map(|r| match r.body {
            EventBody::RainTotal { window_s, depth_mm }
                if window_s > 0 && depth_mm.is_finite() && depth_mm >= 0.0 =>
            {
                Some(RainInterval {
                    end_s: r.time_s,
                    window_s,
                    depth_mm,
                })
            }
            _ => None,
        })
        .collect();
    v.sort_by_key(|r| r.end_s);
    v
}

/// Parse a rain CSV (see the module doc); `path` labels errors.
pub fn parse_csv(text: &str, path: &Path) -> Result<Vec<RainInterval>, ReviewError> {
    let mut out = Vec::new();
    let mut header_seen = false;
    for (i, line) in text.lines().enumerate() {
        let line = line.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let err = |field: &str, what: String| ReviewError::Parse {
            path: path.to_path_buf(),
            line: i + 1,
            field: field.into(),
            what,
        };
        if !header_seen {
            if line.replace(' ', "") != "time_s,window_s,depth_mm" {
                return Err(err(
                    "header",
                    format!("{line:?}: must be time_s,window_s,depth_mm"),
                ));
            }
            header_seen = true;
            continue;
        }
        let cols: Vec<&str> = line.split(',').map(str::trim).collect();
        if cols.len() != 3 {
            return Err(err("row", format!("{} columns: must be 3", cols.len())));
        }
        let end_s: u32 = cols[0]
            .parse()
            .map_err(|e| err("time_s", format!("{:?}: {e}", cols[0])))?;
        let window_s: u32 = cols[1]
            .parse()
            .map_err(|e| err("window_s", format!("{:?}: {e}", cols[1])))?;
        if window_s == 0 {
            return Err(err("window_s", "0: must be > 0".into()));
        }
        let depth_mm: f32 = cols[2]
            .parse()
            .map_err(|e| err("depth_mm", format!("{:?}: {e}", cols[2])))?;
        if !(depth_mm.is_finite() && depth_mm >= 0.0) {
            return Err(err(
                "depth_mm",
                format!("{depth_mm}: must be a number >= 0"),
            ));
        }
        out.push(RainInterval {
            end_s,
            window_s,
            depth_mm,
        });
    }
    out.sort_by_key(|r| r.end_s);
    Ok(out)
}

/// Read a rain CSV file.
pub fn read_csv(path: &Path) -> Result<Vec<RainInterval>, ReviewError> {
    let text = std::fs::read_to_string(path).map_err(|e| ReviewError::io(path, e))?;
    parse_csv(&text, path)
}

/// Write intervals as a rain CSV.
pub fn to_csv(rain: &[RainInterval]) -> String {
    let mut s = String::from("time_s,window_s,depth_mm\n");
    for r in rain {
        s.push_str(&format!("{},{},{}\n", r.end_s, r.window_s, r.depth_mm));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_round_trip_and_errors_name_line_and_field() {
        let rain = vec![
            RainInterval {
                end_s: 600,
                window_s: 300,
                depth_mm: 1.25,
            },
            RainInterval {
                end_s: 900,
                window_s: 300,
                depth_mm: 0.0,
            },
        ];
        let text = to_csv(&rain);
        assert_eq!(parse_csv(&text, Path::new("r.csv")).unwrap(), rain);
        let bad = "# c\ntime_s,window_s,depth_mm\n600,300,1\n900,300,-2\n";
        let e = parse_csv(bad, Path::new("r.csv")).unwrap_err().to_string();
        assert!(e.contains("r.csv: line 4: field depth_mm"), "{e}");
        let e = parse_csv("a,b\n", Path::new("r.csv"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 1: field header"), "{e}");
    }
}
