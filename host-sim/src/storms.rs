//! Storm sources: design storms from the pond's IDF (the core's `rain::design`) and recorded
//! rain files (`crate::rainfile`).

use holdback_core::rain::design::{DesignStorm, MAX_STORM_STEPS, Pattern};

use crate::pondfile::Pond;
use crate::sim::Storm;

/// Design-storm shapes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Shape {
    /// Constant IDF intensity for the whole duration.
    Uniform,
    /// Alternating block (Chow, Maidment & Mays 1988).
    AlternatingBlock,
    /// Chicago storm (Keifer & Chu 1957).
    Chicago,
}

impl Shape {
    /// Name used in files.
    pub fn name(self) -> &'static str {
        match self {
            Shape::Uniform => "uniform",
            Shape::AlternatingBlock => "alternating-block",
            Shape::Chicago => "chicago",
        }
    }
}

/// A design storm for the pond's IDF: `return_period_yr`, `duration_min`, steps of `dt_s`,
/// peak at `peak_ratio` of the duration.
pub fn design(
    pond: &Pond,
    return_period_yr: f32,
    duration_min: u32,
    dt_s: u32,
    shape: Shape,
    peak_ratio: f32,
) -> Result<Storm, String> {
    let duration_s = duration_min
        .checked_mul(60)
        .ok_or_else(|| format!("--duration-min = {duration_min}: too long"))?;
    let storm = DesignStorm::new(return_period_yr, duration_s, dt_s)
        .and_then(|s| s.with_peak_ratio(peak_ratio))
        .map_err(|e| format!("design storm: {e}"))?;
    let pattern = match shape {
        Shape::Uniform => Pattern::Uniform,
        Shape::AlternatingBlock => Pattern::AlternatingBlock,
        Shape::Chicago => Pattern::Chicago,
    };
    let mut buf = vec![0.0f32; MAX_STORM_STEPS];
    let n = storm
        .fill(pond.config.idf(), pattern, &mut buf)
        .map_err(|e| format!("design storm: {e}"))?;
    buf.truncate(n);
    let mut notes = Vec::new();
    let idf = pond.config.idf();
    let periods = holdback_core::rain::Idf::return_periods_years(idf);
    if let (Some(&lo), Some(&hi)) = (periods.first(), periods.last())
        && !(lo..=hi).contains(&return_period_yr)
    {
        notes.push(format!(
            "the {return_period_yr}-year storm is extrapolated beyond the IDF's return periods \
             ({lo} to {hi} years)"
        ));
    }
    let (d_lo, d_hi) = match idf {
        holdback_core::config::IdfModel::Curves(c) => c.duration_range_min(),
        holdback_core::config::IdfModel::Table(t) => (
            t.durations_min().first().copied().unwrap_or(0.0),
            t.durations_min().last().copied().unwrap_or(f32::INFINITY),
        ),
    };
    let step_min = dt_s as f32 / 60.0;
    if (duration_min as f32) > d_hi || step_min < d_lo {
        notes.push(format!(
            "the IDF is declared for {d_lo} to {d_hi} min; this storm reads it at {step_min} to \
             {duration_min} min, beyond that range (extrapolated)"
        ));
    }
    Ok(Storm {
        name: format!(
            "{}-yr {} min {} (dt {} s)",
            return_period_yr,
            duration_min,
            shape.name(),
            dt_s
        ),
        dt_s,
        rain_mm: buf.into_iter().map(f64::from).collect(),
        notes,
    })
}

/// IDF depth for the storm's return period and duration, mm (for checks and reports).
pub fn idf_depth_mm(pond: &Pond, return_period_yr: f32, duration_min: u32) -> f64 {
    use holdback_core::rain::Idf;
    pond.config
        .idf()
        .depth_mm(duration_min as f32, return_period_yr) as f64
}
