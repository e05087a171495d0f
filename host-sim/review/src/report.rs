//! The fleet report: one self-contained HTML file (inline CSS, inline SVG plots, inline JS
//! for sortable tables and CSV download; no external assets), and CSV export of every table.
//!
//! Sections: the cautions; the fleet overview (every pond); every flag raised; one section
//! per pond (its storms, health, gate wear); per-storm details with a plot of stage, release,
//! the permit and the rain. Every exceedance is listed: the report hides none.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;

use crate::error::ReviewError;
use crate::pond::Pond;
use crate::storm::{Flag, PondHealth, StormSummary};
use crate::time::stamp;

/// The cautions printed at the top of every report.
pub const CAUTIONS: [&str; 4] = [
    "These results are for review by a qualified engineer; they are not a design or a compliance certificate.",
    "Local codes, permits and licensed practice govern over anything shown here.",
    "A controller must fail to a safe state; a log that shows otherwise is a defect to act on.",
    "Exceedances are never hidden: every storm whose release went above the permit is listed and flagged, with the reason the device logged (or 'unlogged').",
];

/// A table cell: text shown, and a number to sort by when it is numeric.
#[derive(Debug, Clone, PartialEq)]
pub struct Cell {
    /// Shown text (also the CSV value).
    pub text: String,
    /// Sort value (None: sort as text).
    pub num: Option<f64>,
}

fn t(s: impl Into<String>) -> Cell {
    Cell {
        text: s.into(),
        num: None,
    }
}
fn n(x: f64, decimals: usize) -> Cell {
    if x.is_finite() {
        Cell {
            text: format!("{x:.decimals$}"),
            num: Some(x),
        }
    } else {
        Cell {
            text: String::new(),
            num: Some(f64::NEG_INFINITY),
        }
    }
}
fn on(x: Option<f64>, decimals: usize) -> Cell {
    x.map_or(
        Cell {
            text: String::new(),
            num: Some(f64::NEG_INFINITY),
        },
        |v| n(v, decimals),
    )
}

/// A table of the report (also written as CSV).
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// HTML id and CSV file stem.
    pub id: String,
    /// Caption.
    pub title: String,
    /// Column headers.
    pub headers: Vec<String>,
    /// Rows.
    pub rows: Vec<Vec<Cell>>,
}

impl Table {
    fn new(id: &str, title: &str, headers: &[&str]) -> Table {
        Table {
            id: id.into(),
            title: title.into(),
            headers: headers.iter().map(|h| h.to_string()).collect(),
            rows: Vec::new(),
        }
    }
    /// As CSV (RFC 4180 quoting).
    pub fn csv(&self) -> String {
        let q = |s: &str| {
            if s.contains([',', '"', '\n']) {
                format!("\"{}\"", s.replace('"', "\"\""))
            } else {
                s.to_string()
            }
        };
        let mut out = self
            .headers
            .iter()
            .map(|h| q(h))
            .collect::<Vec<_>>()
            .join(",");
        out.push('\n');
        for r in &self.rows {
            out.push_str(&r.iter().map(|c| q(&c.text)).collect::<Vec<_>>().join(","));
            out.push('\n');
        }
        out
    }
    fn html(&self, out: &mut String) {
        let _ = write!(
            out,
            "<div class=\"tw\"><table class=\"sortable\" id=\"{}\"><caption>{} <button class=\"csv\" data-table=\"{}\">CSV</button></caption><thead><tr>",
            esc(&self.id),
            esc(&self.title),
            esc(&self.id)
        );
        for (i, h) in self.headers.iter().enumerate() {
            let numeric = self
                .rows
                .iter()
                .all(|r| r.get(i).is_some_and(|c| c.num.is_some()));
            let _ = write!(
                out,
                "<th data-type=\"{}\">{}</th>",
                if numeric { "num" } else { "text" },
                esc(h)
            );
        }
        out.push_str("</tr></thead><tbody>");
        for r in &self.rows {
            out.push_str("<tr>");
            for c in r {
                match c.num {
                    Some(v) if v.is_finite() => {
                        let _ = write!(out, "<td data-v=\"{v}\">{}</td>", esc(&c.text));
                    }
                    Some(_) => {
                        let _ = write!(out, "<td data-v=\"-1e300\">{}</td>", esc(&c.text));
                    }
                    None => {
                        let _ = write!(out, "<td>{}</td>", esc(&c.text));
                    }
                }
            }
            out.push_str("</tr>");
        }
        out.push_str("</tbody></table></div>\n");
    }
}

/// HTML-escape.
pub fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// What the report is made of.
pub struct FleetData<'a> {
    /// Every pond.
    pub ponds: &'a [Pond],
    /// Every storm, any order.
    pub storms: &'a [StormSummary],
    /// Health per pond.
    pub health: &'a [PondHealth],
    /// Decode problems per pond (count).
    pub problems: &'a BTreeMap<String, usize>,
}

/// Options of the report.
#[derive(Debug, Clone, Copy)]
pub struct ReportOptions {
    /// Most storms per pond with a plot (flagged storms first, then the rarest).
    pub plots_per_pond: usize,
}

impl Default for ReportOptions {
    fn default() -> Self {
        ReportOptions { plots_per_pond: 6 }
    }
}

fn flags_text(f: &[Flag]) -> String {
    f.iter().map(|f| f.code()).collect::<Vec<_>>().join(" ")
}

fn median(mut v: Vec<f64>) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Every table of the report: the overview, the flags, then per pond its storms and wear.
pub fn tables(d: &FleetData) -> Vec<Table> {
    let mut by_pond: BTreeMap<&str, Vec<&StormSummary>> = BTreeMap::new();
    for s in d.storms {
        by_pond.entry(s.pond_id.as_str()).or_default().push(s);
    }
    for v in by_pond.values_mut() {
        v.sort_by_key(|s| s.start_s);
    }
    let health: BTreeMap<&str, &PondHealth> =
        d.health.iter().map(|h| (h.pond_id.as_str(), h)).collect();
    let mut ov = Table::new(
        "overview",
        "Fleet overview (every pond)",
        &[
            "pond",
            "name",
            "storms",
            "storms over permit",
            "time over permit h",
            "volume over permit m3",
            "rarest storm yr",
            "max freeboard used %",
            "min freeboard left m",
            "median drawdown h",
            "late drawdowns",
            "gate moves/yr",
            "wear budget used",
            "drift m/yr",
            "sensor score",
            "decode problems",
            "flags",
        ],
    );
    let mut fl = Table::new(
        "flags",
        "Every flag raised",
        &["pond", "storm start (UTC)", "flag", "meaning", "detail"],
    );
    let mut out_pond = Vec::new();
    for p in d.ponds {
        let id = p.info.pond_id.as_str();
        let st = by_pond.get(id).cloned().unwrap_or_default();
        let h = health.get(id);
        let mut flagset: BTreeMap<Flag, usize> = BTreeMap::new();
        for s in &st {
            for f in &s.flags {
                *flagset.entry(*f).or_default() += 1;
                let detail = match f {
                    Flag::PermitExceeded => format!(
                        "peak {:.2}× permit, {:.1} h, {:.0} m3 over; reasons: {}",
                        s.peak_release_ratio,
                        s.over_permit_s as f64 / 3600.0,
                        s.over_permit_m3,
                        s.exceed_reasons
                            .keys()
                            .cloned()
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                    Flag::FreeboardBelowMinimum | Flag::Overtopped => {
                        format!(
                            "freeboard left {:.2} m (minimum {:.2} m)",
                            s.freeboard_left_m, p.info.freeboard_min_m
                        )
                    }
                    Flag::DrawdownLate => format!(
                        "drawdown {} vs target {:.0} h",
                        s.drawdown_s.map_or("not reached".into(), |x| format!(
                            "{:.1} h",
                            x as f64 / 3600.0
                        )),
                        s.drawdown_target_s as f64 / 3600.0
                    ),
                    Flag::LargerThanDesign => format!(
                        "{} at {} min (design {} yr)",
                        s.rarest.map_or(String::new(), |r| r.0.text()),
                        s.rarest.map_or(0, |r| r.1),
                        p.info.design_return_period_yr
                    ),
                    Flag::GaugeClogged => format!(
                        "rain {:.1} mm recorded, peak stage {:.2} m",
                        s.rain_depth_mm.unwrap_or(0.0),
                        s.peak_stage_m
                    ),
                    _ => String::new(),
                };
                fl.rows.push(vec![
                    t(id),
                    t(stamp(s.start_s)),
                    t(f.code()),
                    t(f.meaning()),
                    t(detail),
                ]);
            }
        }
        if let Some(h) = h {
            if h.drift_flag {
                *flagset.entry(Flag::SensorDrift).or_default() += 1;
                fl.rows.push(vec![
                    t(id),
                    t(""),
                    t(Flag::SensorDrift.code()),
                    t(Flag::SensorDrift.meaning()),
                    t(format!(
                        "{:+.3} m/yr over {} dry samples (limit {:.3})",
                        h.drift_m_per_year.unwrap_or(0.0),
                        h.dry_samples,
                        p.info.drift_limit_m_per_year
                    )),
                ]);
            }
            for w in h.wear.iter().filter(|w| w.over_budget) {
                *flagset.entry(Flag::GateWearOverBudget).or_default() += 1;
                fl.rows.push(vec![
                    t(id),
                    t(format!("{}", w.year)),
                    t(Flag::GateWearOverBudget.code()),
                    t(Flag::GateWearOverBudget.meaning()),
                    t(format!(
                        "{} moves, {:.1} strokes in {:.0} days (budget {}/yr, {}/yr)",
                        w.moves,
                        w.travel,
                        w.days_covered,
                        p.info.wear.moves_per_year,
                        p.info.wear.travel_per_year
                    )),
                ]);
            }
        }
        let exceeded = st
            .iter()
            .filter(|s| s.flags.contains(&Flag::PermitExceeded))
            .count();
        let rarest = st
            .iter()
            .filter_map(|s| s.rarest)
            .max_by(|a, b| a.0.sort_key().total_cmp(&b.0.sort_key()));
        let days: f64 = h.map_or(0.0, |h| f64::from(h.span_s.1 - h.span_s.0) / 86_400.0);
        let moves: f64 = h.map_or(0.0, |h| h.wear.iter().map(|w| f64::from(w.moves)).sum());
        let wear_ratio = h.map_or(f64::NAN, |h| {
            h.wear
                .iter()
                .map(|w| {
                    let share = f64::from((w.days_covered / 365.0).clamp(1.0 / 365.0, 1.0));
                    (f64::from(w.moves) / (f64::from(p.info.wear.moves_per_year) * share))
                        .max(f64::from(w.travel) / (f64::from(p.info.wear.travel_per_year) * share))
                })
                .fold(f64::NAN, f64::max)
        });
        ov.rows.push(vec![
            t(id),
            t(p.info.name.clone()),
            n(st.len() as f64, 0),
            n(exceeded as f64, 0),
            n(
                st.iter().map(|s| f64::from(s.over_permit_s)).sum::<f64>() / 3600.0,
                1,
            ),
            n(st.iter().map(|s| s.over_permit_m3).sum::<f64>(), 0),
            rarest.map_or(
                Cell {
                    text: "no rain data".into(),
                    num: Some(f64::NEG_INFINITY),
                },
                |r| Cell {
                    text: format!("{} @ {} min", r.0.text(), r.1),
                    num: Some(r.0.sort_key()),
                },
            ),
            n(
                st.iter()
                    .map(|s| f64::from(s.freeboard_used_frac) * 100.0)
                    .fold(f64::NAN, f64::max),
                0,
            ),
            n(
                st.iter()
                    .map(|s| f64::from(s.freeboard_left_m))
                    .fold(f64::NAN, f64::min),
                2,
            ),
            n(
                median(
                    st.iter()
                        .filter_map(|s| s.drawdown_s)
                        .map(|x| f64::from(x) / 3600.0)
                        .collect(),
                ),
                1,
            ),
            n(
                st.iter()
                    .filter(|s| s.flags.contains(&Flag::DrawdownLate))
                    .count() as f64,
                0,
            ),
            n(
                if days > 0.0 {
                    moves * 365.0 / days.max(1.0)
                } else {
                    f64::NAN
                },
                0,
            ),
            n(wear_ratio, 2),
            on(h.and_then(|h| h.drift_m_per_year).map(f64::from), 3),
            on(h.map(|h| f64::from(h.sensor_score)), 2),
            n(d.problems.get(id).copied().unwrap_or(0) as f64, 0),
            t(flagset
                .iter()
                .map(|(f, c)| format!("{}×{c}", f.code()))
                .collect::<Vec<_>>()
                .join(" ")),
        ]);
        let mut stt = Table::new(
            &format!("storms-{id}"),
            &format!("Storms of {id}"),
            &[
                "start (UTC)",
                "hours",
                "rain mm",
                "rarest return period",
                "at duration min",
                "peak stage m",
                "freeboard left m",
                "peak release / permit",
                "over permit h",
                "over permit m3",
                "reasons",
                "captured m3",
                "released m3",
                "drawdown h",
                "target h",
                "gate moves",
                "gate travel",
                "flags",
            ],
        );
        for s in &st {
            stt.rows.push(vec![
                Cell {
                    text: stamp(s.start_s),
                    num: Some(f64::from(s.start_s)),
                },
                n(f64::from(s.end_s - s.start_s) / 3600.0, 1),
                on(s.rain_depth_mm.map(f64::from), 1),
                s.rarest.map_or(
                    Cell {
                        text: "no rain data".into(),
                        num: Some(f64::NEG_INFINITY),
                    },
                    |r| Cell {
                        text: r.0.text(),
                        num: Some(r.0.sort_key()),
                    },
                ),
                on(s.rarest.map(|r| f64::from(r.1)), 0),
                n(f64::from(s.peak_stage_m), 2),
                n(f64::from(s.freeboard_left_m), 2),
                n(f64::from(s.peak_release_ratio), 2),
                n(f64::from(s.over_permit_s) / 3600.0, 2),
                n(s.over_permit_m3, 0),
                t(s.exceed_reasons
                    .iter()
                    .map(|(k, v)| format!("{k}:{v}"))
                    .collect::<Vec<_>>()
                    .join(" ")),
                n(s.captured_m3, 0),
                n(s.released_m3, 0),
                on(s.drawdown_s.map(|x| f64::from(x) / 3600.0), 1),
                n(f64::from(s.drawdown_target_s) / 3600.0, 0),
                n(f64::from(s.gate_moves), 0),
                n(f64::from(s.gate_travel), 2),
                t(format!(
                    "{}{}",
                    flags_text(&s.flags),
                    if s.incomplete { " incomplete" } else { "" }
                )),
            ]);
        }
        let mut wt = Table::new(
            &format!("wear-{id}"),
            &format!("Gate wear and sensor health of {id}"),
            &[
                "year",
                "days covered",
                "moves",
                "travel strokes",
                "over budget",
            ],
        );
        if let Some(h) = h {
            for w in &h.wear {
                wt.rows.push(vec![
                    n(f64::from(w.year), 0),
                    n(f64::from(w.days_covered), 0),
                    n(f64::from(w.moves), 0),
                    n(f64::from(w.travel), 1),
                    t(if w.over_budget { "yes" } else { "no" }),
                ]);
            }
        }
        out_pond.push(stt);
        out_pond.push(wt);
    }
    let mut all = vec![ov, fl];
    all.extend(out_pond);
    all
}

/// Write every table as `<dir>/<table id>.csv`; returns the paths.
pub fn write_csv(dir: &Path, d: &FleetData) -> Result<Vec<std::path::PathBuf>, ReviewError> {
    std::fs::create_dir_all(dir).map_err(|e| ReviewError::io(dir, e))?;
    let mut paths = Vec::new();
    for tb in tables(d) {
        let p = dir.join(format!("{}.csv", tb.id));
        std::fs::write(&p, tb.csv()).map_err(|e| ReviewError::io(&p, e))?;
        paths.push(p);
    }
    Ok(paths)
}

/// The SVG plot of one storm: stage (left axis), release and permit (right axis), rain bars
/// hanging from the top, the crest and the freeboard limit.
pub fn plot_svg(p: &Pond, s: &StormSummary) -> String {
    let (w, h, l, r, top, bot) = (760.0f64, 280.0f64, 56.0f64, 64.0f64, 20.0f64, 34.0f64);
    let (t0, t1) = (f64::from(s.start_s), f64::from(s.end_s.max(s.start_s + 60)));
    let x = |t: f64| l + (t - t0) / (t1 - t0) * (w - l - r);
    let info = &p.info;
    let smin = f64::from(
        info.normal_m.min(
            s.plot
                .iter()
                .map(|q| q.stage_m)
                .fold(f32::INFINITY, f32::min),
        ),
    ) - 0.05;
    let smax = f64::from(info.crest_m.max(s.peak_stage_m)) + 0.1;
    let ys = |v: f64| top + (1.0 - (v - smin) / (smax - smin)) * (h - top - bot);
    let qmax = f64::from(s.peak_release_m3s.max(info.permit_m3s)) * 1.15;
    let yq = |v: f64| top + (1.0 - v / qmax) * (h - top - bot);
    let mut o = String::new();
    let _ = write!(
        o,
        "<svg class=\"plot\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" role=\"img\" aria-label=\"storm {} at {}\">",
        esc(&info.pond_id),
        stamp(s.start_s)
    );
    let _ = write!(
        o,
        "<rect x=\"{l}\" y=\"{top}\" width=\"{}\" height=\"{}\" fill=\"#fafafa\" stroke=\"#999\"/>",
        w - l - r,
        h - top - bot
    );
    let rmax = s
        .plot_rain
        .iter()
        .map(|q| f64::from(q.2) * 3600.0 / f64::from(q.1.max(1)))
        .fold(1.0, f64::max);
    for &(end, win, mm) in &s.plot_rain {
        let (xa, xb) = (x(f64::from(end - win)), x(f64::from(end)));
        let hh = (f64::from(mm) * 3600.0 / f64::from(win.max(1))) / rmax * (h - top - bot) * 0.3;
        let _ = write!(
            o,
            "<rect class=\"rain\" x=\"{xa:.1}\" y=\"{top}\" width=\"{:.1}\" height=\"{hh:.1}\" fill=\"#7aa6d6\"/>",
            (xb - xa).max(0.8)
        );
    }
    let line = |o: &mut String, y: f64, color: &str, label: &str| {
        let _ = write!(
            o,
            "<line x1=\"{l}\" x2=\"{}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"{color}\" stroke-dasharray=\"5,4\"/><text x=\"{}\" y=\"{:.1}\" font-size=\"10\" fill=\"{color}\" text-anchor=\"end\">{label}</text>",
            w - r,
            w - r - 2.0,
            y - 2.0
        );
    };
    line(&mut o, ys(f64::from(info.crest_m)), "#b00", "crest");
    line(
        &mut o,
        ys(f64::from(info.crest_m - info.freeboard_min_m)),
        "#d70",
        "freeboard limit",
    );
    line(&mut o, yq(f64::from(info.permit_m3s)), "#070", "permit");
    let path = |f: &dyn Fn(&crate::storm::PlotPoint) -> f64| {
        s.plot
            .iter()
            .enumerate()
            .map(|(i, q)| {
                format!(
                    "{}{:.1},{:.1}",
                    if i == 0 { "M" } else { "L" },
                    x(f64::from(q.t)),
                    f(q)
                )
            })
            .collect::<String>()
    };
    let _ = write!(
        o,
        "<path class=\"stage\" d=\"{}\" fill=\"none\" stroke=\"#124\" stroke-width=\"1.6\"/>",
        path(&|q| ys(f64::from(q.stage_m)))
    );
    let _ = write!(
        o,
        "<path class=\"release\" d=\"{}\" fill=\"none\" stroke=\"#2a2\" stroke-width=\"1.2\"/>",
        path(&|q| yq(f64::from(q.release_m3s)))
    );
    for k in 0..=4 {
        let v = smin + (smax - smin) * f64::from(k) / 4.0;
        let q = qmax * f64::from(k) / 4.0;
        let _ = write!(
            o,
            "<text x=\"{}\" y=\"{:.1}\" font-size=\"10\" text-anchor=\"end\">{v:.2}</text><text x=\"{}\" y=\"{:.1}\" font-size=\"10\">{q:.3}</text>",
            l - 4.0,
            ys(v) + 3.0,
            w - r + 4.0,
            yq(q) + 3.0
        );
    }
    let _ = write!(
        o,
        "<text x=\"{l}\" y=\"{}\" font-size=\"11\">{}</text><text x=\"{}\" y=\"{}\" font-size=\"11\" text-anchor=\"end\">{}</text>",
        h - 8.0,
        stamp(s.start_s),
        w - r,
        h - 8.0,
        stamp(s.end_s)
    );
    let _ = write!(
        o,
        "<text x=\"4\" y=\"12\" font-size=\"11\">stage m</text><text x=\"{}\" y=\"12\" font-size=\"11\" text-anchor=\"end\">release m³/s</text></svg>",
        w - 4.0
    );
    o
}

const CSS: &str = "body{font:14px/1.4 system-ui,sans-serif;margin:1.5em;color:#111}h1{font-size:1.6em}h2{margin-top:2em;border-bottom:1px solid #ccc}\
.caution{background:#fff4e0;border:1px solid #e0a040;padding:.6em 1em}.tw{overflow-x:auto}table{border-collapse:collapse;margin:.8em 0}\
th,td{border:1px solid #ccc;padding:2px 6px;text-align:right;white-space:nowrap}td:first-child,th:first-child{text-align:left}\
th{background:#eee;cursor:pointer;user-select:none}th.asc::after{content:' ▲'}th.desc::after{content:' ▼'}caption{text-align:left;font-weight:600;padding:.3em 0}\
button.csv{font-size:11px;margin-left:1em}.flag{color:#a00;font-weight:600}details{margin:.5em 0}summary{cursor:pointer}";

const JS: &str = r#"(function(){
function val(td,num){if(!td)return num?-Infinity:'';if(num){var v=td.getAttribute('data-v');return v===null?-Infinity:parseFloat(v);}return td.textContent;}
document.querySelectorAll('table.sortable').forEach(function(tb){
 var ths=tb.tHead.rows[0].cells;
 Array.prototype.forEach.call(ths,function(th,i){th.addEventListener('click',function(){
  var num=th.getAttribute('data-type')==='num';var asc=!th.classList.contains('asc');
  Array.prototype.forEach.call(ths,function(h){h.classList.remove('asc','desc');});
  th.classList.add(asc?'asc':'desc');
  var body=tb.tBodies[0];var rows=Array.prototype.slice.call(body.rows);
  rows.sort(function(a,b){var x=val(a.cells[i],num),y=val(b.cells[i],num);var c=num?(x-y):String(x).localeCompare(String(y));return asc?c:-c;});
  rows.forEach(function(r){body.appendChild(r);});
 });});
});
document.querySelectorAll('button.csv').forEach(function(b){b.addEventListener('click',function(ev){
 ev.stopPropagation();var tb=document.getElementById(b.getAttribute('data-table'));
 var q=function(s){return /[",\n]/.test(s)?'"'+s.replace(/"/g,'""')+'"':s;};
 var lines=Array.prototype.map.call(tb.rows,function(r){return Array.prototype.map.call(r.cells,function(c){return q(c.textContent);}).join(',');});
 var a=document.createElement('a');a.href=URL.createObjectURL(new Blob([lines.join('\n')+'\n'],{type:'text/csv'}));
 a.download=b.getAttribute('data-table')+'.csv';document.body.appendChild(a);a.click();a.remove();
});});
document.body.setAttribute('data-ready','1');
})();"#;

/// The whole report as one HTML string.
pub fn html(d: &FleetData, opts: &ReportOptions) -> String {
    let tabs = tables(d);
    let mut o = String::with_capacity(1 << 20);
    o.push_str("<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>holdback fleet review</title><style>");
    o.push_str(CSS);
    o.push_str("</style></head><body><h1>holdback fleet review</h1><div class=\"caution\" id=\"cautions\"><strong>Cautions</strong><ul>");
    for c in CAUTIONS {
        let _ = write!(o, "<li>{}</li>", esc(c));
    }
    let total_exceed = d
        .storms
        .iter()
        .filter(|s| s.flags.contains(&Flag::PermitExceeded))
        .count();
    let _ = write!(
        o,
        "</ul></div><p>{} ponds, {} storms, {} storms with the release above the permit.</p>",
        d.ponds.len(),
        d.storms.len(),
        total_exceed
    );
    o.push_str("<h2 id=\"overview-h\">Fleet overview</h2>");
    if let Some(tb) = tabs.first() {
        tb.html(&mut o);
    }
    o.push_str("<h2>Flags</h2><p>Flag meanings: ");
    for f in Flag::ALL {
        let _ = write!(o, "<code>{}</code> {}; ", f.code(), esc(f.meaning()));
    }
    o.push_str("</p>");
    if let Some(tb) = tabs.get(1) {
        tb.html(&mut o);
    }
    let mut by_pond: BTreeMap<&str, Vec<&StormSummary>> = BTreeMap::new();
    for s in d.storms {
        by_pond.entry(s.pond_id.as_str()).or_default().push(s);
    }
    for (k, p) in d.ponds.iter().enumerate() {
        let id = p.info.pond_id.as_str();
        let i = &p.info;
        let _ = write!(
            o,
            "<section class=\"pond\" id=\"pond-{}\"><h2>{} — {}</h2><p>Permit {:.4} m³/s; normal level {:.2} m, crest {:.2} m, minimum freeboard {:.2} m; drawdown target {:.0} h; design return period {} yr.</p>",
            esc(id),
            esc(id),
            esc(&i.name),
            i.permit_m3s,
            i.normal_m,
            i.crest_m,
            i.freeboard_min_m,
            f64::from(i.drawdown_target_s) / 3600.0,
            i.design_return_period_yr
        );
        if let Some(tb) = tabs.get(2 + 2 * k) {
            tb.html(&mut o);
        }
        if let Some(tb) = tabs.get(3 + 2 * k) {
            tb.html(&mut o);
        }
        let mut st = by_pond.get(id).cloned().unwrap_or_default();
        st.sort_by(|a, b| {
            (!a.flags.is_empty())
                .cmp(&!b.flags.is_empty())
                .reverse()
                .then(
                    b.rarest
                        .map_or(f64::MIN, |r| r.0.sort_key())
                        .total_cmp(&a.rarest.map_or(f64::MIN, |r| r.0.sort_key())),
                )
        });
        let _ = write!(
            o,
            "<h3>Storm details ({} of {} storms: flagged first, then the rarest)</h3>",
            st.len().min(opts.plots_per_pond),
            st.len()
        );
        for s in st.iter().take(opts.plots_per_pond) {
            let _ = write!(
                o,
                "<details class=\"storm\" open><summary>{} — {} mm, {} <span class=\"flag\">{}</span></summary>",
                stamp(s.start_s),
                s.rain_depth_mm
                    .map_or("no rain data".into(), |d| format!("{d:.1}")),
                s.rarest
                    .map_or(String::new(), |r| format!("{} at {} min", r.0.text(), r.1)),
                esc(&flags_text(&s.flags))
            );
            o.push_str(&plot_svg(p, s));
            o.push_str("<p>Peaks: ");
            for pk in &s.peaks {
                let _ = write!(
                    o,
                    "{} min {:.1} mm/h ({}){}; ",
                    pk.duration_min,
                    pk.intensity_mm_h,
                    pk.return_period.text(),
                    if pk.saturated { " saturated" } else { "" }
                );
            }
            o.push_str("</p><p>Modes: ");
            for (tm, m) in &s.modes {
                let _ = write!(o, "{} {}; ", &stamp(*tm)[11..], esc(m));
            }
            o.push_str("</p><p>Faults, alarms, exceedances: ");
            if s.happenings.is_empty() {
                o.push_str("none");
            }
            for h in &s.happenings {
                let _ = write!(o, "{} {} {}; ", stamp(h.time_s), esc(&h.kind), esc(&h.what));
            }
            o.push_str("</p></details>");
        }
        o.push_str("</section>\n");
    }
    o.push_str("<script>");
    o.push_str(JS);
    o.push_str("</script></body></html>\n");
    o
}
