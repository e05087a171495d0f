//! Text tables, plots (SVG and PNG, labelled with a built-in font, see [`png_font`]),
//! and the one-page HTML sign-off report.

use std::fmt::Write as _;
use std::path::Path;

use plotters::coord::Shift;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

use crate::pondfile::Pond;
use crate::sim::{ForecastCheck, Run, Storm};
use crate::summary::{self, Summary};

/// The caution printed in every report.
pub const CAUTION_HTML: &str = "These results are for review by a qualified engineer. Local \
codes, permits and licensed practice govern every design and operating decision. The gate holds \
back floodwater: a controller must fail to a safe state, and an exceedance of the permitted \
release is always reported, never hidden.";

/// The stage–storage–discharge rating table (CSV text).
pub fn rating_table(p: &Pond, opening: Option<f32>, step_m: f32) -> String {
    let c = &p.config;
    let o = c.outlet();
    let max = o.max_opening_m();
    let openings: Vec<f32> = match opening {
        Some(a) => vec![a],
        None => vec![0.0, 0.5 * max, max],
    };
    let lo = c.storage().floor_m();
    let hi = c.levels().crest_m + 0.5;
    let mut s = String::from("stage_m,storage_m3");
    for a in &openings {
        let _ = write!(s, ",q_open_{a:.3}_m3s");
    }
    s.push('\n');
    let n = ((hi - lo) / step_m).ceil() as usize;
    for i in 0..=n {
        let h = (lo + step_m * i as f32).min(hi);
        let _ = write!(s, "{h:.3},{:.1}", c.storage().storage_m3(h));
        for a in &openings {
            let _ = write!(s, ",{:.4}", o.discharge_m3s(h, *a));
        }
        s.push('\n');
        if h >= hi {
            break;
        }
    }
    s
}

/// A hyetograph as CSV: step start time, depth, mean intensity.
pub fn hyetograph_csv(s: &Storm) -> String {
    let mut out = String::from("t_s,rain_mm,intensity_mm_h\n");
    for (k, d) in s.rain_mm.iter().enumerate() {
        let _ = writeln!(
            out,
            "{},{:.4},{:.3}",
            k as u64 * s.dt_s as u64,
            d,
            d * 3600.0 / s.dt_s as f64
        );
    }
    out
}

/// The side-by-side summary table (text).
pub fn summary_table(runs: &[(Run, Summary)]) -> String {
    let mut s = format!(
        "{:<10} {:>9} {:>10} {:>10} {:>10} {:>9} {:>8} {:>8} {:>6} {:>5}\n",
        "policy",
        "peak_m",
        "freebd_m",
        "storage_m3",
        "release",
        "over_s",
        "ratio",
        "draw_h",
        "moves",
        "pass"
    );
    for (_, m) in runs {
        let _ = writeln!(
            s,
            "{:<10} {:>9.3} {:>10.3} {:>10.0} {:>10.3} {:>9} {:>8} {:>8} {:>6} {:>5}",
            m.policy,
            m.peak_stage_m,
            m.freeboard_left_m,
            m.peak_storage_m3,
            m.peak_release_m3s,
            m.time_over_permit_s,
            m.storage_ratio_to_bound
                .map_or("-".into(), |x| format!("{x:.3}")),
            m.drawdown_s
                .map_or("-".into(), |d| format!("{:.1}", d as f64 / 3600.0)),
            m.gate_moves,
            if m.pass { "yes" } else { "NO" }
        );
    }
    s
}

/// The controller's forecast next to the simulated stage (text table).
pub fn forecast_table(fc: &ForecastCheck) -> String {
    let mut s = format!(
        "# forecast at t = {} min (stage {:.3} m; {:.1} mm more rain assumed): predicted \
         stage at the permit target vs simulated\n",
        fc.at_s / 60,
        fc.from_stage_m,
        fc.future_rain_mm
    );
    s.push_str("ahead_min,inflow_pred_m3s,inflow_sim_m3s,stage_pred_m,stage_sim_m,error_m\n");
    for r in &fc.rows {
        let _ = writeln!(
            s,
            "{},{:.3},{:.3},{:.3},{:.3},{:+.3}",
            r.ahead_s / 60,
            r.inflow_m3s,
            r.actual_inflow_m3s,
            r.predicted_stage_m,
            r.actual_stage_m,
            r.predicted_stage_m - r.actual_stage_m
        );
    }
    s
}

const COLOURS: [RGBColor; 4] = [
    RGBColor(31, 119, 180),
    RGBColor(214, 39, 40),
    RGBColor(44, 160, 44),
    RGBColor(148, 103, 189),
];

fn mode_colour(mode: &str) -> RGBColor {
    match mode {
        "capture" => RGBColor(222, 235, 247),
        "surcharge" => RGBColor(253, 208, 162),
        "failsafe" => RGBColor(252, 187, 161),
        "drawdown" => RGBColor(229, 245, 224),
        "manual" => RGBColor(218, 218, 235),
        _ => RGBColor(245, 245, 245),
    }
}

/// One panel's chart: time in hours across, `y` up.
type Panel<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// A panel on `area` with time in hours across `x` and `y` up; captioned and with label
/// areas only when text is drawn.
fn panel<'a, DB: DrawingBackend + 'a>(
    area: &'a DrawingArea<DB, Shift>,
    caption: &str,
    text: bool,
    x: std::ops::Range<f64>,
    y: std::ops::Range<f64>,
) -> Result<Panel<'a, DB>, String>
where
    DB::ErrorType: 'static,
{
    let mut b = ChartBuilder::on(area);
    let (x_labels, y_labels) = if text { (28, 45) } else { (0, 0) };
    b.margin(6)
        .x_label_area_size(x_labels)
        .y_label_area_size(y_labels);
    if text {
        b.caption(caption, ("sans-serif", 14));
    }
    b.build_cartesian_2d(x, y).map_err(|x| x.to_string())
}

/// The series labels of a panel, top right, when text is drawn.
fn legend<'a, DB: DrawingBackend + 'a>(ch: &mut Panel<'a, DB>, text: bool) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    if !text {
        return Ok(());
    }
    ch.configure_series_labels()
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .label_font(("sans-serif", 12))
        .position(SeriesLabelPosition::UpperRight)
        .draw()
        .map_err(|x| x.to_string())
}

/// A dashed horizontal line at `y` across the run (the permit, the crest, crest − freeboard).
fn level_line<'a, DB: DrawingBackend + 'a>(
    ch: &mut Panel<'a, DB>,
    y: f64,
    t_end: f64,
    colour: RGBColor,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    ch.draw_series(DashedLineSeries::new(
        vec![(0.0, y), (t_end, y)],
        6,
        4,
        colour.stroke_width(1),
    ))
    .map(|_| ())
    .map_err(|x| x.to_string())
}

/// Draws the four panels (rain; inflow and releases with the permit; stages with crest and
/// freeboard; gate opening with mode bands) on `root`. `text` = false draws no text at all.
fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    p: &Pond,
    runs: &[(Run, Summary)],
    text: bool,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    let e = |x: DrawingAreaErrorKind<DB::ErrorType>| x.to_string();
    root.fill(&WHITE).map_err(e)?;
    let panels = root.split_evenly((4, 1));
    let Some((first, _)) = runs.first() else {
        return Ok(());
    };
    // Until every run is back at the normal level (plus an hour), else the whole run.
    let t_end = runs
        .iter()
        .map(|(r, _)| match r.drawdown_s {
            Some(d) => r.rain_end_s + d + 3600,
            None => r.length_s,
        })
        .max()
        .unwrap_or(3600)
        .max(3600) as f64
        / 3600.0;
    let cfg = &p.config;
    let hours = |t: u32| t as f64 / 3600.0;

    // 1. rain
    let rmax = first
        .rows
        .iter()
        .map(|r| r.rain_mm as f64)
        .fold(0.1, f64::max);
    let mut ch = panel(
        &panels[0],
        "Rain (mm per record step)",
        text,
        0f64..t_end,
        0f64..rmax * 1.1,
    )?;
    let mut mesh = ch.configure_mesh();
    if !text {
        mesh.x_labels(0).y_labels(0);
    }
    mesh.disable_x_mesh().draw().map_err(e)?;
    let rec_h = first.rows.get(1).map_or(1.0 / 60.0, |r| {
        (r.t_s - first.rows.first().map_or(0, |a| a.t_s)) as f64 / 3600.0
    });
    ch.draw_series(first.rows.iter().filter(|r| r.rain_mm > 0.0).map(|r| {
        let x = hours(r.t_s);
        Rectangle::new(
            [(x - rec_h, 0.0), (x, r.rain_mm as f64)],
            COLOURS[0].filled(),
        )
    }))
    .map_err(e)?;

    // 2. flows
    let permit = cfg.permit().release_m3s as f64;
    let qmax = runs
        .iter()
        .flat_map(|(r, _)| r.rows.iter())
        .map(|r| r.inflow_m3s.max(r.release_m3s) as f64)
        .fold(permit * 1.2, f64::max);
    let mut ch = panel(
        &panels[1],
        "Inflow and release (m3/s); dashed: permit",
        text,
        0f64..t_end,
        0f64..qmax * 1.05,
    )?;
    let mut mesh = ch.configure_mesh();
    if !text {
        mesh.x_labels(0).y_labels(0);
    }
    mesh.draw().map_err(e)?;
    let s = ch
        .draw_series(LineSeries::new(
            first
                .rows
                .iter()
                .map(|r| (hours(r.t_s), r.inflow_m3s as f64)),
            BLACK.stroke_width(1),
        ))
        .map_err(e)?;
    if text {
        s.label("inflow")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], BLACK));
    }
    for (i, (r, m)) in runs.iter().enumerate() {
        let c = COLOURS[(i + 1) % COLOURS.len()];
        let s = ch
            .draw_series(LineSeries::new(
                r.rows.iter().map(|x| (hours(x.t_s), x.release_m3s as f64)),
                c.stroke_width(2),
            ))
            .map_err(e)?;
        if text {
            s.label(format!("release, {}", m.policy))
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], c));
        }
    }
    level_line(&mut ch, permit, t_end, RED)?;
    legend(&mut ch, text)?;

    // 3. stage
    let crest = cfg.levels().crest_m as f64;
    let limit = cfg.stage_limit_m() as f64;
    let floor = cfg.storage().floor_m() as f64;
    let hmax = runs
        .iter()
        .flat_map(|(r, _)| r.rows.iter())
        .map(|r| r.stage_m as f64)
        .fold(crest + 0.1, f64::max);
    let mut ch = panel(
        &panels[2],
        "Stage (m); dashed: crest and crest - freeboard; black dashed: forecast",
        text,
        0f64..t_end,
        floor..hmax + 0.05,
    )?;
    let mut mesh = ch.configure_mesh();
    if !text {
        mesh.x_labels(0).y_labels(0);
    }
    mesh.draw().map_err(e)?;
    for (i, (r, m)) in runs.iter().enumerate() {
        let c = COLOURS[(i + 1) % COLOURS.len()];
        let s = ch
            .draw_series(LineSeries::new(
                r.rows.iter().map(|x| (hours(x.t_s), x.stage_m as f64)),
                c.stroke_width(2),
            ))
            .map_err(e)?;
        if text {
            s.label(m.policy.to_string())
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], c));
        }
    }
    for fc in &first.forecast_checks {
        let t0 = fc.at_s as f64;
        let s = ch
            .draw_series(DashedLineSeries::new(
                fc.rows
                    .iter()
                    .map(|x| ((t0 + x.ahead_s as f64) / 3600.0, x.predicted_stage_m as f64)),
                4,
                3,
                BLACK.stroke_width(2),
            ))
            .map_err(e)?;
        if text {
            s.label(format!("forecast at {} min", fc.at_s / 60))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], BLACK));
        }
    }
    level_line(&mut ch, crest, t_end, RED)?;
    level_line(&mut ch, limit, t_end, RGBColor(255, 127, 14))?;
    legend(&mut ch, text)?;

    // 4. gate with mode bands (first policy)
    let gmax = cfg.outlet().max_opening_m() as f64;
    let mut ch = panel(
        &panels[3],
        &format!(
            "Gate opening (m), policy {}; bands: mode",
            runs.first().map_or("", |(_, m)| m.policy)
        ),
        text,
        0f64..t_end,
        0f64..gmax * 1.05,
    )?;
    ch.draw_series(first.rows.iter().map(|r| {
        let x = hours(r.t_s);
        Rectangle::new(
            [(x - rec_h, 0.0), (x, gmax * 1.05)],
            mode_colour(r.mode).filled(),
        )
    }))
    .map_err(e)?;
    let mut mesh = ch.configure_mesh();
    if text {
        mesh.x_desc("time from storm start, h");
    } else {
        mesh.x_labels(0).y_labels(0);
    }
    mesh.draw().map_err(e)?;
    ch.draw_series(LineSeries::new(
        first.rows.iter().map(|r| (hours(r.t_s), r.gate_m as f64)),
        COLOURS[1].stroke_width(2),
    ))
    .map_err(e)?;
    ch.draw_series(LineSeries::new(
        first
            .rows
            .iter()
            .map(|r| (hours(r.t_s), r.command_m as f64)),
        BLACK.stroke_width(1),
    ))
    .map_err(e)?;
    if text {
        let mut modes: Vec<&str> = first.rows.iter().map(|r| r.mode).collect();
        modes.dedup();
        modes.sort_unstable();
        modes.dedup();
        for mname in &modes {
            let c = mode_colour(mname);
            ch.draw_series(std::iter::once(Rectangle::new(
                [(0.0, 0.0), (0.0, 0.0)],
                c.filled(),
            )))
            .map_err(e)?
            .label(format!("mode {mname}"))
            .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], c.filled()));
        }
    }
    legend(&mut ch, text)?;
    root.present().map_err(e)?;
    Ok(())
}

/// The plots as an SVG document (labelled with the font of [`png_font`]).
pub fn plot_svg(p: &Pond, runs: &[(Run, Summary)]) -> Result<String, String> {
    // plotters lays text out with the registered font, in SVG too.
    let text = png_font();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 1100)).into_drawing_area();
        draw(&root, p, runs, text)?;
    }
    Ok(svg)
}

/// Registers the plots' font: the TrueType file named by `HOLDBACK_FONT` if it loads, else
/// DejaVu Sans built into the binary (the `dejavu` crate; Bitstream Vera licence), so plots
/// have their labels on any machine. Returns whether a font is registered (false only if
/// even the built-in font is refused; then the plots have no text).
pub fn png_font() -> bool {
    use std::sync::OnceLock;
    static OK: OnceLock<bool> = OnceLock::new();
    *OK.get_or_init(|| {
        if let Some(path) = std::env::var_os("HOLDBACK_FONT").filter(|p| !p.is_empty())
            && let Ok(bytes) = std::fs::read(&path)
        {
            let bytes: &'static [u8] = Box::leak(bytes.into_boxed_slice());
            if plotters::style::register_font("sans-serif", FontStyle::Normal, bytes).is_ok() {
                return true;
            }
            eprintln!(
                "holdback: note: HOLDBACK_FONT = {}: not a usable font; using the built-in DejaVu Sans",
                path.to_string_lossy()
            );
        }
        plotters::style::register_font("sans-serif", FontStyle::Normal, dejavu::sans::regular())
            .is_ok()
    })
}

/// Writes the plots as a PNG; returns whether it has text.
pub fn plot_png(p: &Pond, runs: &[(Run, Summary)], path: &Path) -> Result<bool, String> {
    let text = png_font();
    let root = BitMapBackend::new(path, (960, 1100)).into_drawing_area();
    draw(&root, p, runs, text)?;
    Ok(text)
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// The one-page, self-contained HTML sign-off report.
pub fn html(p: &Pond, storm: &Storm, runs: &[(Run, Summary)], svg: &str) -> String {
    let c = &p.config;
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>holdback \
         sign-off: {name}</title><style>body{{font-family:sans-serif;max-width:1000px;margin:\
         1em auto;color:#222}}table{{border-collapse:collapse;margin:0.5em 0}}td,th{{border:1px \
         solid #999;padding:2px 8px;text-align:left}}.pass{{color:#080;font-weight:bold}}.fail\
         {{color:#c00;font-weight:bold}}.caution{{border:2px solid #c60;padding:0.5em;\
         background:#fff6e8}}</style></head><body>",
        name = esc(&p.name)
    );
    let _ = write!(
        h,
        "<h1>Sign-off report: {}</h1><p class=\"caution\"><b>Caution.</b> {}</p>",
        esc(&p.name),
        CAUTION_HTML
    );
    // The verdict judges the controller when it ran (the device's policy), else the first.
    let judged = runs
        .iter()
        .find(|(_, m)| m.policy == "controller")
        .or(runs.first());
    let verdict = judged.is_none_or(|(_, m)| m.pass);
    let _ = write!(
        h,
        "<h2>Verdict</h2><p>Policy <b>{}</b> on storm <b>{}</b>: <span class=\"{}\">{}</span></p>",
        judged.map_or("-", |(_, m)| m.policy),
        esc(&storm.name),
        if verdict { "pass" } else { "fail" },
        if verdict {
            "PASSES every criterion"
        } else {
            "FAILS at least one criterion"
        }
    );
    let warnings: &[String] = judged.map_or(&[], |(_, m)| &m.warnings);
    if !warnings.is_empty() {
        h.push_str("<h2>Warnings</h2><ul class=\"caution\">");
        for w in warnings {
            let _ = write!(h, "<li>{}</li>", esc(w));
        }
        h.push_str("</ul>");
    }
    let _ = write!(
        h,
        "<h2>Pond</h2><table><tr><th>normal level</th><td>{:.3} m</td></tr><tr><th>spillway \
         crest</th><td>{:.3} m</td></tr><tr><th>freeboard</th><td>{:.3} m</td></tr><tr><th>\
         permitted release</th><td>{} m3/s (margin {:.0} %)</td></tr><tr><th>gate</th><td>max \
         opening {:.3} m, safe opening {:.3} m</td></tr><tr><th>catchment C·A</th><td>{:.2} ha \
         ({} sub-catchments)</td></tr><tr><th>drawdown target</th><td>{:.1} h</td></tr></table>",
        c.levels().normal_m,
        c.levels().crest_m,
        c.levels().freeboard_m,
        c.permit().release_m3s,
        c.permit().margin * 100.0,
        c.outlet().max_opening_m(),
        c.safe().safe_opening_m,
        c.catchment().effective_area_m2() / 10_000.0,
        p.sub_names.len(),
        c.control().drawdown_target_s as f64 / 3600.0
    );
    if !p.warnings.is_empty() {
        h.push_str("<h3>Warnings from the pond check</h3><ul>");
        for w in &p.warnings {
            let _ = write!(h, "<li>{}</li>", esc(w));
        }
        h.push_str("</ul>");
    }
    let _ = write!(
        h,
        "<h2>Storm</h2><p>{}: {:.2} mm in {:.1} h (step {} s).</p>",
        esc(&storm.name),
        storm.total_mm(),
        storm.duration_s() as f64 / 3600.0,
        storm.dt_s
    );
    h.push_str("<h2>Criteria</h2><table><tr><th>policy</th><th>criterion</th><th>rule</th><th>measured</th><th>result</th></tr>");
    for (_, m) in runs {
        for cr in &m.criteria {
            let _ = write!(
                h,
                "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"{}\">{}</td></tr>",
                m.policy,
                cr.id,
                esc(&cr.rule),
                esc(&cr.measured),
                if cr.pass { "pass" } else { "fail" },
                if cr.pass { "pass" } else { "FAIL" }
            );
        }
    }
    h.push_str("</table><h2>Results</h2><table><tr><th>policy</th><th>peak stage m</th><th>freeboard left m</th><th>peak storage m3</th><th>peak release m3/s</th><th>over permit s</th><th>storage / bound</th><th>gate moves</th></tr>");
    for (_, m) in runs {
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{:.3}</td><td>{:.3}</td><td>{:.0}</td><td>{:.3}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            m.policy,
            m.peak_stage_m,
            m.freeboard_left_m,
            m.peak_storage_m3,
            m.peak_release_m3s,
            m.time_over_permit_s,
            m.storage_ratio_to_bound
                .map_or("-".into(), |x| format!("{x:.3}")),
            m.gate_moves
        );
    }
    h.push_str("</table><p>The bound is the perfect-foresight schedule (release = min(permit, full-open capacity) from the first drop): no policy that keeps the permit stores less. The controller is the device's own control code (holdback-core), stepped on the sensor models; threshold is the level-threshold baseline; fixed is the pre-retrofit outlet.</p>");
    let faults: &[crate::sim::Fault] = runs.first().map_or(&[], |(_, m)| &m.faults);
    let _ = write!(h, "<p>Faults injected: {}.</p>", faults.len());
    if !faults.is_empty() {
        h.push_str(
            "<table><tr><th>target</th><th>fault</th><th>from (s)</th><th>until (s)</th></tr>",
        );
        for f in faults {
            let _ = write!(
                h,
                "<tr><td>{:?}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
                f.target,
                esc(&format!("{:?}", f.kind)),
                f.at_s,
                f.until_s
                    .map_or("end of run".to_string(), |u| u.to_string())
            );
        }
        h.push_str("</table>");
    }
    for (_, m) in runs.iter().filter(|(_, m)| !m.events.is_empty()) {
        let _ = write!(
            h,
            "<h2>Events, policy {}</h2><table><tr><th>t (min)</th><th>event</th><th>detail</th></tr>",
            m.policy
        );
        for ev in &m.events {
            let _ = write!(
                h,
                "<tr><td>{:.1}</td><td>{}</td><td>{}</td></tr>",
                ev.t_s as f64 / 60.0,
                ev.kind,
                esc(&ev.detail)
            );
        }
        h.push_str("</table><p>Time in each mode: ");
        let parts: Vec<String> = m
            .time_in_mode_s
            .iter()
            .map(|(k, v)| format!("{k} {:.1} h", *v as f64 / 3600.0))
            .collect();
        h.push_str(&esc(&parts.join(", ")));
        h.push_str(".</p>");
    }
    for (_, m) in runs {
        for fc in &m.forecast_checks {
            let _ = write!(
                h,
                "<h2>Forecast at {} min ({}) and what happened</h2><p>The controller's own \
                 outlook (time–area state of the rain counted so far, {:.1} mm more rain \
                 assumed) routed at the permit target from its filtered stage {:.3} m.</p>\
                 <table><tr><th>ahead (min)</th><th>inflow forecast m3/s</th><th>inflow \
                 simulated m3/s</th><th>stage forecast m</th><th>stage simulated m</th></tr>",
                fc.at_s / 60,
                m.policy,
                fc.future_rain_mm,
                fc.from_stage_m
            );
            for r in &fc.rows {
                let _ = write!(
                    h,
                    "<tr><td>{}</td><td>{:.3}</td><td>{:.3}</td><td>{:.3}</td><td>{:.3}</td></tr>",
                    r.ahead_s / 60,
                    r.inflow_m3s,
                    r.actual_inflow_m3s,
                    r.predicted_stage_m,
                    r.actual_stage_m
                );
            }
            h.push_str("</table>");
        }
    }
    h.push_str("<h2>Plots</h2>");
    // The SVG document's XML declaration is not allowed inline.
    let body = svg.find("<svg").map_or(svg, |i| &svg[i..]);
    h.push_str(body);
    let _ = write!(
        h,
        "<p class=\"caution\">{}</p><p>Made by holdback {}.</p></body></html>",
        CAUTION_HTML,
        env!("CARGO_PKG_VERSION")
    );
    h
}

/// Writes `series-POLICY.csv`, `summary-POLICY.json`, `plots.svg`, `plots.png` and
/// `report.html` into `dir`.
pub fn write_all(
    p: &Pond,
    storm: &Storm,
    runs: &[(Run, Summary)],
    dir: &Path,
) -> Result<(), String> {
    std::fs::create_dir_all(dir).map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
    let w = |name: &str, bytes: &[u8]| {
        let path = dir.join(name);
        std::fs::write(&path, bytes).map_err(|e| format!("cannot write {}: {e}", path.display()))
    };
    for (r, m) in runs {
        let mut csv = Vec::new();
        summary::write_csv(r, &mut csv).map_err(|e| e.to_string())?;
        w(&format!("series-{}.csv", m.policy), &csv)?;
        let json = serde_json::to_string_pretty(m).map_err(|e| e.to_string())?;
        w(&format!("summary-{}.json", m.policy), json.as_bytes())?;
    }
    let svg = plot_svg(p, runs)?;
    w("plots.svg", svg.as_bytes())?;
    let text = plot_png(p, runs, &dir.join("plots.png"))?;
    if !text {
        eprintln!("holdback: note: the plots' font could not be loaded: the plots have no labels");
    }
    w("report.html", html(p, storm, runs, &svg).as_bytes())?;
    Ok(())
}
