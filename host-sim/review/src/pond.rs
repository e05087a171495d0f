//! What the review needs to know about a pond, and its JSON pond file.
//!
//! A pond is identified by the id of the device fitted to it (`pond_id` = the `device` of
//! its logs). Units: stages m on the pond's survey datum, release m³/s, times s, gate travel
//! in full strokes (1.0 = closed to fully open), IDF durations min and intensities mm/h.
//!
//! ```json
//! {"pond_id":"mill-lane","name":"Mill Lane basin","permit_m3s":0.12,"normal_m":0.3,
//!  "crest_m":2.4,"freeboard_min_m":0.3,"drawdown_target_s":172800,
//!  "design_return_period_yr":10,"inter_event_s":21600,
//!  "idf":{"curves":[{"return_period_yr":2,"form":"talbot","a":2500,"b":15}, ...],
//!         "min_duration_min":5,"max_duration_min":1440},
//!  "wear":{"moves_per_year":4000,"travel_per_year":150},
//!  "drift_limit_m_per_year":0.05,"normal_tolerance_m":0.02}
//! ```
//!
//! [`Pond::new`] validates once (every number, the order of levels, the IDF through the core's
//! own constructors); after that nothing fails.

use std::path::Path;

use holdback_core::config::{IdfModel, PondConfig};
use holdback_core::rain::{IdfCurves, IdfFormula, IdfTable};
use serde::{Deserialize, Serialize};

use crate::error::ReviewError;

/// One IDF curve of a pond file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CurveSpec {
    /// Return period, years.
    pub return_period_yr: f32,
    /// `talbot` (`i = a/(t+b)`), `sherman` (`i = a/(t+b)^c`) or `power` (`i = a·t^(−b)`).
    pub form: String,
    /// `a`.
    pub a: f32,
    /// `b`.
    pub b: f32,
    /// `c` (Sherman only).
    #[serde(default)]
    pub c: f32,
}

/// The IDF of a pond file: formula curves or a table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum IdfSpec {
    /// Formula curves, one per return period.
    Curves {
        /// The curves, in increasing return period.
        curves: Vec<CurveSpec>,
        /// Shortest duration the curves hold for, min.
        min_duration_min: f32,
        /// Longest duration, min.
        max_duration_min: f32,
    },
    /// A table: `intensities_mm_h[d][t]` for `durations_min[d]`, `return_periods_yr[t]`.
    Table {
        /// Durations, min.
        durations_min: Vec<f32>,
        /// Return periods, years.
        return_periods_yr: Vec<f32>,
        /// Rows per duration.
        intensities_mm_h: Vec<Vec<f32>>,
    },
}

impl IdfSpec {
    /// Build the core IDF (validated by the core).
    pub fn build(&self) -> Result<IdfModel, String> {
        match self {
            IdfSpec::Curves {
                curves,
                min_duration_min,
                max_duration_min,
            } => {
                let mut cs = Vec::with_capacity(curves.len());
                for (k, c) in curves.iter().enumerate() {
                    let f = match c.form.as_str() {
                        "talbot" => IdfFormula::Talbot { a: c.a, b: c.b },
                        "sherman" => IdfFormula::Sherman {
                            a: c.a,
                            b: c.b,
                            c: c.c,
                        },
                        "power" => IdfFormula::PowerLaw { a: c.a, b: c.b },
                        other => {
                            return Err(format!(
                                "idf.curves[{k}].form = {other:?}: must be talbot, sherman or power"
                            ));
                        }
                    };
                    cs.push((c.return_period_yr, f));
                }
                IdfCurves::new(&cs, *min_duration_min, *max_duration_min)
                    .map(IdfModel::Curves)
                    .map_err(|e| format!("idf: {e}"))
            }
            IdfSpec::Table {
                durations_min,
                return_periods_yr,
                intensities_mm_h,
            } => {
                let flat: Vec<f32> = intensities_mm_h.iter().flatten().copied().collect();
                IdfTable::new(durations_min, return_periods_yr, &flat)
                    .map(IdfModel::Table)
                    .map_err(|e| format!("idf: {e}"))
            }
        }
    }
}

/// Gate wear budget.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct WearBudget {
    /// Gate moves a year the actuator is rated for.
    pub moves_per_year: u32,
    /// Travel a year, full strokes.
    pub travel_per_year: f32,
}

fn default_tol() -> f32 {
    0.02
}
fn default_drift() -> f32 {
    0.05
}
fn default_inter_event() -> f32 {
    6.0 * 3600.0
}

/// A pond file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PondInfo {
    /// The pond's id, the same as its device's id.
    pub pond_id: String,
    /// A readable name.
    pub name: String,
    /// Permitted release, m³/s.
    pub permit_m3s: f32,
    /// Normal (dry-weather) level, m.
    pub normal_m: f32,
    /// Spillway / embankment crest, m: above it the pond overtops.
    pub crest_m: f32,
    /// Least freeboard below the crest the pond must keep, m.
    pub freeboard_min_m: f32,
    /// Back at the normal level within this time after rain ends, s.
    pub drawdown_target_s: u32,
    /// Return period the pond was designed for, years.
    pub design_return_period_yr: f32,
    /// Dry time that separates two storms, s (default 6 h).
    #[serde(default = "default_inter_event")]
    pub inter_event_s: f32,
    /// The site's IDF.
    pub idf: IdfSpec,
    /// Gate wear budget.
    pub wear: WearBudget,
    /// Dry-weather stage may drift this much a year before the sensor is flagged, m/yr
    /// (default 0.05: common practice, no source).
    #[serde(default = "default_drift")]
    pub drift_limit_m_per_year: f32,
    /// Drawdown is over when the stage is within this of the normal level, m (default 0.02:
    /// common practice, no source).
    #[serde(default = "default_tol")]
    pub normal_tolerance_m: f32,
}

/// A validated pond.
#[derive(Debug, Clone, PartialEq)]
pub struct Pond {
    /// The description.
    pub info: PondInfo,
    /// Its IDF, built by the core.
    pub idf: IdfModel,
}

fn bad(origin: &str, what: String) -> ReviewError {
    ReviewError::Pond {
        origin: origin.to_string(),
        what,
    }
}

impl Pond {
    /// Validate a description.
    pub fn new(info: PondInfo) -> Result<Pond, ReviewError> {
        let o = info.pond_id.clone();
        if info.pond_id.is_empty() || info.pond_id.len() > crate::logfile::MAX_DEVICE_LEN {
            return Err(bad(&o, "pond_id: must be 1..=64 bytes".into()));
        }
        let pos = |field: &str, v: f32| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(bad(&o, format!("{field} = {v}: must be > 0")))
            }
        };
        pos("permit_m3s", info.permit_m3s)?;
        pos("design_return_period_yr", info.design_return_period_yr)?;
        pos("inter_event_s", info.inter_event_s)?;
        pos("drift_limit_m_per_year", info.drift_limit_m_per_year)?;
        pos("normal_tolerance_m", info.normal_tolerance_m)?;
        pos("wear.travel_per_year", info.wear.travel_per_year)?;
        if info.drawdown_target_s == 0 || info.wear.moves_per_year == 0 {
            return Err(bad(
                &o,
                "drawdown_target_s and wear.moves_per_year: must be > 0".into(),
            ));
        }
        if !(info.freeboard_min_m.is_finite() && info.freeboard_min_m >= 0.0) {
            return Err(bad(
                &o,
                format!("freeboard_min_m = {}: must be >= 0", info.freeboard_min_m),
            ));
        }
        if !(info.normal_m.is_finite()
            && info.crest_m.is_finite()
            && info.normal_m < info.crest_m - info.freeboard_min_m)
        {
            return Err(bad(
                &o,
                format!(
                    "normal_m = {}: must be below crest_m - freeboard_min_m",
                    info.normal_m
                ),
            ));
        }
        let idf = info.idf.build().map_err(|e| bad(&o, e))?;
        Ok(Pond { info, idf })
    }

    /// Read and validate a JSON pond file.
    pub fn load(path: &Path) -> Result<Pond, ReviewError> {
        let text = std::fs::read_to_string(path).map_err(|e| ReviewError::io(path, e))?;
        Pond::from_json(&text, path)
    }

    /// Parse and validate the text of a JSON pond file; `path` labels errors.
    pub fn from_json(text: &str, path: &Path) -> Result<Pond, ReviewError> {
        let info: PondInfo = serde_json::from_str(text).map_err(|e| ReviewError::Parse {
            path: path.to_path_buf(),
            line: e.line(),
            field: "pond file".into(),
            what: e.to_string(),
        })?;
        Pond::new(info).map_err(|e| match e {
            ReviewError::Pond { what, .. } => bad(&path.display().to_string(), what),
            other => other,
        })
    }

    /// The review description of a pond from its validated core config: permit, levels,
    /// drawdown target, design return period and inter-event time come from the config; the
    /// IDF must be given as a spec (the review stores it as text), and the wear budget is
    /// the asset manager's.
    pub fn from_config(
        pond_id: &str,
        name: &str,
        config: &PondConfig,
        idf: IdfSpec,
        wear: WearBudget,
    ) -> Result<Pond, ReviewError> {
        let l = config.levels();
        let c = config.control();
        Pond::new(PondInfo {
            pond_id: pond_id.into(),
            name: name.into(),
            permit_m3s: config.permit().release_m3s,
            normal_m: l.normal_m,
            crest_m: l.crest_m,
            freeboard_min_m: l.freeboard_m,
            drawdown_target_s: c.drawdown_target_s,
            design_return_period_yr: if c.design_return_period_yr > 0.0 {
                c.design_return_period_yr
            } else {
                10.0
            },
            inter_event_s: c.inter_event_s as f32,
            idf,
            wear,
            drift_limit_m_per_year: default_drift(),
            normal_tolerance_m: default_tol(),
        })
    }

    /// Highest stage that still keeps the minimum freeboard, m.
    pub fn stage_limit_m(&self) -> f32 {
        self.info.crest_m - self.info.freeboard_min_m
    }
}
