//! Recorded rain files: CSV of interval depths or of tipping-bucket tip times, turned into a
//! hyetograph (depth per fixed step) and split into events.
//!
//! Nothing is dropped silently: every row that cannot be read is a [`RowProblem`] with its
//! line number, every gap between intervals is reported with the lines either side, and what
//! was read before a bad row is kept. The caller decides whether problems are fatal.
//!
//! Times: `iso` (`2017-01-01 12:29:59`, `2010-07-17T07:30Z`, seconds optional, a trailing `Z`
//! or no zone; all stamps of a file are read in one zone, the file's), `s` (seconds from any
//! origin) or `min` (minutes). Each interval row's stamp is the **end** of its interval by
//! default (`--stamp start` for the other convention).

use std::fmt;

/// What the rows of a rain file hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum RainKind {
    /// One row per interval: its time stamp and its depth.
    Interval,
    /// One row per bucket tip: its time stamp (the depth column, if any, is ignored).
    Tips,
}

/// How time stamps are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum TimeFormat {
    /// Calendar date and time, `YYYY-MM-DD[T| ]HH:MM[:SS][Z]`.
    Iso,
    /// Seconds.
    S,
    /// Minutes.
    Min,
}

/// Depth unit of the depth column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum DepthUnit {
    /// Millimetres.
    Mm,
    /// Inches (25.4 mm, exact).
    In,
}

/// Where an interval's stamp sits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Stamp {
    /// The stamp is the end of the interval.
    End,
    /// The stamp is the start of the interval.
    Start,
}

/// Most intervals one rain record may span (60 million: 114 years of 1-minute steps).
pub const MAX_RECORD_STEPS: i64 = 60_000_000;

/// How to read a rain file.
#[derive(Debug, Clone)]
pub struct RainFormat {
    /// Interval depths or tip times.
    pub kind: RainKind,
    /// Time column: a header name or a 1-based number.
    pub time_col: String,
    /// Depth column: a header name or a 1-based number (interval files).
    pub depth_col: String,
    /// Time format.
    pub time_format: TimeFormat,
    /// Depth unit.
    pub unit: DepthUnit,
    /// Interval length, s (interval files); also the step of the hyetograph.
    pub interval_s: u32,
    /// Depth of one tip, mm (tip files).
    pub bucket_mm: f64,
    /// Stamp convention of interval rows.
    pub stamp: Stamp,
    /// Missing intervals count as dry (sparse files listing wet steps only); still reported.
    pub sparse: bool,
}

/// One row that could not be read.
#[derive(Debug, Clone, PartialEq)]
pub struct RowProblem {
    /// 1-based line number in the file.
    pub line: usize,
    /// What is wrong.
    pub message: String,
}

impl fmt::Display for RowProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

/// A gap between two read rows.
#[derive(Debug, Clone, PartialEq)]
pub struct Gap {
    /// Line of the row before the gap.
    pub after_line: usize,
    /// Line of the row after it.
    pub before_line: usize,
    /// Missing time, s.
    pub missing_s: i64,
}

impl fmt::Display for Gap {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "lines {}-{}: {} s without data (filled as dry)",
            self.after_line, self.before_line, self.missing_s
        )
    }
}

/// A read rain record.
#[derive(Debug, Clone, PartialEq)]
pub struct RainRecord {
    /// Time of the first step's start, s on the file's clock.
    pub start_s: i64,
    /// Step, s.
    pub dt_s: u32,
    /// Depth per step, mm.
    pub rain_mm: Vec<f64>,
    /// Rows that could not be read (kept out of the record, reported).
    pub bad_rows: Vec<RowProblem>,
    /// Gaps filled as dry.
    pub gaps: Vec<Gap>,
    /// Rows read.
    pub rows_read: usize,
}

impl RainRecord {
    /// Total depth, mm.
    pub fn total_mm(&self) -> f64 {
        self.rain_mm.iter().sum()
    }
}

// The calendar (H. Hinnant's `days_from_civil` and `civil_from_days`, proleptic Gregorian,
// days from 1970-01-01) is the fleet review's: one copy for both tools.
pub use holdback_review::time::{civil_from_days, days_from_civil};

/// A time on the file's clock written the way the file writes it: `YYYY-MM-DD HH:MM` for
/// calendar stamps, seconds or minutes otherwise.
pub fn clock_text(t_s: i64, format: TimeFormat) -> String {
    match format {
        TimeFormat::Iso => {
            let (y, m, d) = civil_from_days(t_s.div_euclid(86_400));
            let sod = t_s.rem_euclid(86_400);
            format!(
                "{y:04}-{m:02}-{d:02} {:02}:{:02}",
                sod / 3600,
                sod % 3600 / 60
            )
        }
        TimeFormat::S => format!("{t_s} s"),
        TimeFormat::Min => format!("{} min", t_s as f64 / 60.0),
    }
}

/// Seconds since 1970-01-01T00:00 of an ISO-like stamp.
pub fn parse_iso(s: &str) -> Result<i64, String> {
    let s = s.trim();
    let expected = || format!("time {s:?}: expected YYYY-MM-DD HH:MM[:SS[.fff]][Z|±HH:MM]");
    let (date, time) = s.split_once(['T', ' ']).ok_or_else(expected)?;
    // A UTC offset (Z, +HH:MM, -HH:MM, +HHMM, +HH) brings the stamp to UTC, so a file that
    // changes offset (daylight saving) keeps its order.
    let (time, offset_s) = if let Some(t) = time.strip_suffix('Z') {
        (t, 0)
    } else if let Some(i) = time.rfind(['+', '-']) {
        let (t, off) = time.split_at(i);
        let sign = if off.starts_with('-') { -1 } else { 1 };
        let digits: String = off[1..].chars().filter(|c| *c != ':').collect();
        if !digits.bytes().all(|b| b.is_ascii_digit()) {
            return Err(format!("time {s:?}: UTC offset {off:?} is not ±HH:MM"));
        }
        let (oh, om) = match digits.len() {
            2 => (digits.as_str(), "0"),
            4 => digits.split_at(2),
            _ => return Err(format!("time {s:?}: UTC offset {off:?} is not ±HH:MM")),
        };
        let (oh, om) = match (oh.parse::<i64>(), om.parse::<i64>()) {
            (Ok(h), Ok(m)) if h <= 14 && m < 60 => (h, m),
            _ => return Err(format!("time {s:?}: UTC offset {off:?} is not ±HH:MM")),
        };
        (t, sign * (oh * 3600 + om * 60))
    } else {
        (time, 0)
    };
    let num = |p: &str, what: &str| {
        p.parse::<i64>()
            .map_err(|_| format!("time {s:?}: {what} {p:?} is not a number"))
    };
    let d: Vec<&str> = date.split('-').collect();
    let t: Vec<&str> = time.split(':').collect();
    if d.len() != 3 || !(2..=3).contains(&t.len()) {
        return Err(expected());
    }
    let (y, mo, da) = (num(d[0], "year")?, num(d[1], "month")?, num(d[2], "day")?);
    let (h, mi) = (num(t[0], "hour")?, num(t[1], "minute")?);
    // Fractions of a second are dropped: the record's steps are whole seconds.
    let se = match t.get(2) {
        Some(x) => {
            let whole = match x.split_once(['.', ',']) {
                Some((w, frac)) if !frac.is_empty() && frac.bytes().all(|b| b.is_ascii_digit()) => {
                    w
                }
                Some(_) => return Err(format!("time {s:?}: second {x:?} is not a number")),
                None => x,
            };
            num(whole, "second")?
        }
        None => 0,
    };
    if !(1..=12).contains(&mo) || !(1..=31).contains(&da) || h > 23 || mi > 59 || se > 60 {
        return Err(format!("time {s:?}: a field is out of range"));
    }
    let leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    let month_days = match mo {
        2 if leap => 29,
        2 => 28,
        4 | 6 | 9 | 11 => 30,
        _ => 31,
    };
    if da > month_days {
        return Err(format!(
            "time {s:?}: month {mo} of {y} has {month_days} days"
        ));
    }
    Ok(days_from_civil(y, mo, da) * 86_400 + h * 3600 + mi * 60 + se - offset_s)
}

fn parse_time(s: &str, f: TimeFormat) -> Result<i64, String> {
    match f {
        TimeFormat::Iso => parse_iso(s),
        TimeFormat::S | TimeFormat::Min => {
            let v: f64 = s
                .trim()
                .parse()
                .map_err(|_| format!("time {s:?} is not a number"))?;
            let v = if f == TimeFormat::Min { v * 60.0 } else { v };
            if v.is_finite() && v.abs() < 1e12 {
                Ok(v.round() as i64)
            } else {
                Err(format!("time {s:?} is out of range"))
            }
        }
    }
}

fn column(header: Option<&[String]>, spec: &str, what: &str) -> Result<usize, String> {
    if let Ok(n) = spec.parse::<usize>() {
        return n
            .checked_sub(1)
            .ok_or_else(|| format!("--{what}-col {spec}: columns count from 1"));
    }
    let h = header.ok_or_else(|| format!("--{what}-col {spec:?}: the file has no header line"))?;
    h.iter()
        .position(|c| c.trim() == spec)
        .ok_or_else(|| format!("--{what}-col {spec:?}: no such column; the header has {h:?}"))
}

/// Reads a rain file's text. An error only when nothing can be read at all (no such column,
/// no data rows); row-level problems are in the record.
pub fn parse(text: &str, fmt: &RainFormat) -> Result<RainRecord, String> {
    if fmt.interval_s == 0 {
        return Err("--interval-s = 0: must be > 0".into());
    }
    // A byte-order mark (spreadsheet exports) is not part of the first header.
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l))
        .filter(|(_, l)| !l.trim().is_empty() && !l.trim_start().starts_with('#'))
        .peekable();
    let first_is_header = match fmt.time_col.parse::<usize>() {
        Err(_) => true,
        Ok(n) => lines.peek().is_some_and(|(_, l)| {
            let cell = l.split(',').nth(n.saturating_sub(1)).unwrap_or("");
            parse_time(cell, fmt.time_format).is_err()
        }),
    };
    let header: Option<Vec<String>> = if first_is_header {
        lines
            .next()
            .map(|(_, l)| l.split(',').map(|c| c.trim().to_string()).collect())
    } else {
        None
    };
    let tcol = column(header.as_deref(), &fmt.time_col, "time")?;
    let dcol = match fmt.kind {
        RainKind::Interval => Some(column(header.as_deref(), &fmt.depth_col, "depth")?),
        RainKind::Tips => None,
    };
    let to_mm = match fmt.unit {
        DepthUnit::Mm => 1.0,
        DepthUnit::In => 25.4,
    };
    // Most rain one row may hold: 40 mm a minute over its interval (at least one minute),
    // just above the heaviest one-minute rain recorded (about 38 mm, from memory). Only a
    // unit or column mistake gets past it; such a row is reported, not replayed.
    let max_row_mm = 40.0 * (f64::from(fmt.interval_s) / 60.0).max(1.0);
    // (line, interval start s, depth mm)
    let mut rows: Vec<(usize, i64, f64)> = Vec::new();
    let mut bad = Vec::new();
    for (line, l) in lines {
        let cells: Vec<&str> = l.split(',').collect();
        let Some(tcell) = cells.get(tcol) else {
            bad.push(RowProblem {
                line,
                message: format!("no column {} (the row has {})", tcol + 1, cells.len()),
            });
            continue;
        };
        let t = match parse_time(tcell, fmt.time_format) {
            Ok(t) => t,
            Err(e) => {
                bad.push(RowProblem { line, message: e });
                continue;
            }
        };
        let depth = match dcol {
            None => fmt.bucket_mm,
            Some(c) => match cells.get(c).map(|s| s.trim().parse::<f64>()) {
                Some(Ok(d)) if d.is_finite() && d >= 0.0 && d * to_mm <= max_row_mm => d * to_mm,
                Some(Ok(d)) if d.is_finite() && d >= 0.0 => {
                    bad.push(RowProblem {
                        line,
                        message: format!(
                            "depth {d} ({:.0} mm) is more than {max_row_mm:.0} mm in {} s, \
                             beyond the heaviest rain ever recorded (about 38 mm in one minute, \
                             from memory); check the depth column and --unit",
                            d * to_mm,
                            fmt.interval_s
                        ),
                    });
                    continue;
                }
                Some(Ok(d)) => {
                    bad.push(RowProblem {
                        line,
                        message: format!("depth {d}: must be a finite number >= 0"),
                    });
                    continue;
                }
                Some(Err(_)) => {
                    bad.push(RowProblem {
                        line,
                        message: format!(
                            "depth {:?} is not a number",
                            cells.get(c).copied().unwrap_or("")
                        ),
                    });
                    continue;
                }
                None => {
                    bad.push(RowProblem {
                        line,
                        message: format!("no column {} (the row has {})", c + 1, cells.len()),
                    });
                    continue;
                }
            },
        };
        let start = match (fmt.kind, fmt.stamp) {
            (RainKind::Interval, Stamp::End) => t - i64::from(fmt.interval_s),
            _ => t,
        };
        if fmt.kind == RainKind::Interval
            && let Some(&(pl, ps, _)) = rows.last()
            && start == ps
        {
            bad.push(RowProblem {
                line,
                message: format!("the same interval as line {pl} again: not added twice"),
            });
            continue;
        }
        if let Some(&(pl, ps, _)) = rows.last()
            && start < ps
        {
            bad.push(RowProblem {
                line,
                message: format!("time goes backwards (before line {pl})"),
            });
            continue;
        }
        rows.push((line, start, depth));
    }
    let Some(&(_, t0, _)) = rows.first() else {
        return Err(format!(
            "no readable data rows ({} bad rows{})",
            bad.len(),
            bad.first()
                .map_or(String::new(), |b| format!("; first: {b}"))
        ));
    };
    let dt = i64::from(fmt.interval_s);
    let t0 = t0.div_euclid(dt) * dt;
    // Rows are in time order (a row going backwards is refused above), so the last one ends
    // the record. A stray far-off timestamp must give an error, not a record of billions of
    // dry steps.
    if let Some(&(last_line, last, _)) = rows.last() {
        let steps = (last - t0).div_euclid(dt).saturating_add(1);
        if steps > MAX_RECORD_STEPS {
            return Err(format!(
                "line {last_line}: the record would span {steps} intervals of {dt} s from the \
                 first data row, more than {MAX_RECORD_STEPS} (about 114 years of 1-minute \
                 steps); check the time column and format, or split the file"
            ));
        }
    }
    let mut rain: Vec<f64> = Vec::new();
    let mut gaps = Vec::new();
    let mut prev: Option<(usize, i64)> = None;
    for &(line, start, depth) in &rows {
        let k = ((start - t0).div_euclid(dt)) as usize;
        if rain.len() <= k {
            rain.resize(k + 1, 0.0);
        }
        rain[k] += depth;
        if fmt.kind == RainKind::Interval
            && let Some((pl, ps)) = prev
        {
            let missing = start - ps - dt;
            if missing > 0 && !fmt.sparse {
                gaps.push(Gap {
                    after_line: pl,
                    before_line: line,
                    missing_s: missing,
                });
            } else if missing < 0 && start != ps {
                bad.push(RowProblem {
                    line,
                    message: format!(
                        "interval overlaps the one on line {pl} ({} s apart, interval {dt} s)",
                        start - ps
                    ),
                });
            }
        }
        prev = Some((line, start));
    }
    Ok(RainRecord {
        start_s: t0,
        dt_s: fmt.interval_s,
        rain_mm: rain,
        bad_rows: bad,
        gaps,
        rows_read: rows.len(),
    })
}

/// One rain event: a stretch of steps between dry spells of at least the inter-event time.
#[derive(Debug, Clone, PartialEq)]
pub struct Event {
    /// Index of the first wet step.
    pub first_step: usize,
    /// Index after the last wet step.
    pub end_step: usize,
    /// Total depth, mm.
    pub depth_mm: f64,
}

/// Splits a record into events separated by at least `inter_event_s` without rain.
pub fn split_events(rec: &RainRecord, inter_event_s: u32) -> Vec<Event> {
    let dt = rec.dt_s.max(1) as usize;
    let dry_steps = (inter_event_s as usize).div_ceil(dt).max(1);
    let mut out: Vec<Event> = Vec::new();
    let mut last_wet: Option<usize> = None;
    for (k, &d) in rec.rain_mm.iter().enumerate() {
        if d <= 0.0 {
            continue;
        }
        match (out.last_mut(), last_wet) {
            (Some(e), Some(lw)) if k - lw <= dry_steps => {
                e.end_step = k + 1;
                e.depth_mm += d;
            }
            _ => out.push(Event {
                first_step: k,
                end_step: k + 1,
                depth_mm: d,
            }),
        }
        last_wet = Some(k);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fmt() -> RainFormat {
        RainFormat {
            kind: RainKind::Interval,
            time_col: "t".into(),
            depth_col: "mm".into(),
            time_format: TimeFormat::Iso,
            unit: DepthUnit::Mm,
            interval_s: 300,
            bucket_mm: 0.2,
            stamp: Stamp::Start,
            sparse: false,
        }
    }

    /// 2000-03-01T00:00:10Z is 951 868 810 s after the Unix epoch (Python 3
    /// `datetime(2000, 3, 1, 0, 0, 10, tzinfo=timezone.utc).timestamp()`; by hand: 30 years
    /// with 7 leap days, then January and February 2000, 31 + 29 days).
    #[test]
    fn iso_dates_count_days_correctly() {
        assert_eq!(parse_iso("1970-01-01 00:00").unwrap(), 0);
        assert_eq!(parse_iso("2000-03-01T00:00:10Z").unwrap(), 951_868_810);
        assert!(parse_iso("2000-13-01 00:00").is_err());
    }

    /// Stamps as loggers and spreadsheets write them: fractions of a second (dropped), UTC
    /// offsets (brought to UTC: 12:00+02:00 is 10:00Z), and a byte-order mark before the
    /// header. Before, each of these made every row a bad row.
    #[test]
    fn logger_stamps_with_fractions_offsets_and_a_bom_are_read() {
        let base = parse_iso("2021-06-01 10:00:00").unwrap();
        for (text, want) in [
            ("2021-06-01T10:00:00.250Z", base),
            ("2021-06-01 10:00:00,9", base),
            ("2021-06-01T12:00:00+02:00", base),
            ("2021-06-01T05:30-04:30", base),
            ("2021-06-01T11:00:00+0100", base),
            ("2021-06-01T09:00:00-01", base),
        ] {
            assert_eq!(parse_iso(text), Ok(want), "{text}");
        }
        for bad in [
            "2021-06-01T10:00:00.x",
            "2021-06-01T10:00:00+2",
            "2021-06-01T10:00:00+25:00",
            // Found by the rain_file fuzz target: a non-ASCII offset of four bytes made the
            // hour/minute split cut a character in two (a panic).
            "2021-06-01T10:00-;\u{be}5",
        ] {
            assert!(parse_iso(bad).is_err(), "{bad}");
        }
        let f = RainFormat {
            kind: RainKind::Tips,
            ..fmt()
        };
        let text = "\u{feff}t\n2021-06-01T10:00:10.5+02:00\n2021-06-01T10:01:20.0+02:00\n";
        let r = parse(text, &f).unwrap();
        assert!(r.bad_rows.is_empty(), "{:?}", r.bad_rows);
        assert!((r.total_mm() - 0.4).abs() < 1e-12);
        assert_eq!(r.start_s, parse_iso("2021-06-01 08:00").unwrap());
    }

    /// Event times are printed back on the file's calendar: `civil_from_days` inverts
    /// `days_from_civil` over 1600–2400 (leap centuries included), and 951 868 810 s is
    /// 2000-03-01 00:00 (the Python 3 value of the test above).
    #[test]
    fn clock_text_inverts_the_calendar() {
        for z in days_from_civil(1600, 1, 1)..days_from_civil(2400, 12, 31) {
            let (y, m, d) = civil_from_days(z);
            assert_eq!(days_from_civil(y, m, d), z);
        }
        assert_eq!(civil_from_days(days_from_civil(2000, 2, 29)), (2000, 2, 29));
        assert_eq!(clock_text(951_868_810, TimeFormat::Iso), "2000-03-01 00:00");
        assert_eq!(clock_text(-60, TimeFormat::Iso), "1969-12-31 23:59");
        assert_eq!(clock_text(5400, TimeFormat::S), "5400 s");
        assert_eq!(clock_text(5400, TimeFormat::Min), "90 min");
    }

    #[test]
    fn bad_rows_and_gaps_are_reported_and_nothing_read_is_lost() {
        let text = "t,mm\n2020-01-01 00:00,1.0\n2020-01-01 00:05,x\n2020-01-01 00:10,2.0\n\
                    2020-01-01 00:25,0.5\n2020-01-01 00:30,-1\n";
        let r = parse(text, &fmt()).unwrap();
        assert_eq!(r.rows_read, 3);
        assert_eq!(r.total_mm(), 3.5);
        assert_eq!(r.bad_rows.len(), 2);
        assert_eq!(r.bad_rows[0].line, 3);
        assert!(r.bad_rows[0].to_string().contains("\"x\""));
        assert_eq!(r.bad_rows[1].line, 6);
        // The bad row leaves a gap of its own (lines 2-4), then 00:10 to 00:25 misses two.
        assert_eq!(r.gaps.len(), 2);
        assert_eq!((r.gaps[0].after_line, r.gaps[0].before_line), (2, 4));
        assert_eq!(r.gaps[0].missing_s, 300);
        assert_eq!((r.gaps[1].after_line, r.gaps[1].before_line), (4, 5));
        assert_eq!(r.gaps[1].missing_s, 600);
    }

    /// Rows that would be read wrongly are reported by line and kept out of the record: a
    /// date that does not exist (2021 is not a leap year), the same interval twice (it would
    /// count twice), and a depth no rain reaches (1e30 mm made the replay's release read 0 and
    /// pass the permit); the good rows are all kept.
    #[test]
    fn impossible_dates_duplicates_and_absurd_depths_are_reported_not_replayed() {
        assert!(parse_iso("2021-02-29 00:00").is_err());
        assert!(parse_iso("2020-02-29 00:00").is_ok());
        assert!(parse_iso("2020-04-31 00:00").is_err());
        let text = "t,mm\n2021-01-01 00:00,1.0\n2021-01-01 00:00,1.0\n2021-01-01 00:05,1e30\n\
                    2021-01-01 00:10,2.0\n2021-02-31 00:15,1.0\n";
        let r = parse(text, &fmt()).unwrap();
        assert_eq!(r.rows_read, 2);
        assert_eq!(r.total_mm(), 3.0);
        let lines: Vec<usize> = r.bad_rows.iter().map(|b| b.line).collect();
        assert_eq!(lines, [3, 4, 6]);
        assert!(
            r.bad_rows[0].to_string().contains("line 2"),
            "{}",
            r.bad_rows[0]
        );
        assert!(
            r.bad_rows[1].to_string().contains("heaviest rain"),
            "{}",
            r.bad_rows[1]
        );
        assert!(
            r.bad_rows[2].to_string().contains("28 days"),
            "{}",
            r.bad_rows[2]
        );
    }

    /// A stray far-off timestamp (found by fuzzing: it made the reader allocate gigabytes of
    /// dry steps) is an error naming its line, not a giant record.
    #[test]
    fn a_record_spanning_millennia_is_refused_with_its_line() {
        let text = "t,mm\n2020-01-01 00:00,1.0\n9999-12-31 00:00,1.0\n";
        let e = parse(text, &fmt()).unwrap_err();
        assert!(e.starts_with("line 3:"), "{e}");
        assert!(e.contains("intervals of 300 s"), "{e}");
    }

    #[test]
    fn events_split_on_dry_time() {
        let rec = RainRecord {
            start_s: 0,
            dt_s: 300,
            rain_mm: vec![1.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, 2.0],
            bad_rows: vec![],
            gaps: vec![],
            rows_read: 8,
        };
        let e = split_events(&rec, 900);
        assert_eq!(e.len(), 2);
        assert_eq!(e[0].depth_mm, 2.0);
        assert_eq!((e[1].first_step, e[1].end_step), (7, 8));
    }
}
