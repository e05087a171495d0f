//! The pond file (TOML): everything the device needs about one pond, read into the core's
//! [`PondSpec`] and validated through the core constructors, with errors named by their path
//! in the file and warnings for what is legal but suspicious.
//!
//! SI by default (keys carry the unit: `_m`, `_m2`, `_m3s`, `_ha`, `_mm_h`, `_s`); a
//! top-level `units = "us"` takes US customary keys instead (`_ft`, `_ft2`, `_cfs`, `_acres`,
//! `_in_h`), converted once at load by [`crate::units`]. The format is described in
//! `host-sim/POND-FILE.md` and shown by `examples/demo-pond.toml`.

use std::fmt;

use holdback_core::config::{ControlSettings, PondConfig};
use holdback_core::hydraulics::{FixedStructure, Outlet};
use holdback_core::packed::{
    BuildError, CatchmentSpec, ControlSpec, FormulaSpec, GateSpec, IdfSpec, OutletSpec, PackError,
    PondSpec, SensorSpec, SpecPart, StorageSpec, StructureSpec, SubCatchmentSpec,
};
use holdback_core::routing::{self, Inflow};
use holdback_core::runoff::{FlowPath, Segment, TimeOfConcentration};
use holdback_core::validate::Invalid;
use serde::Deserialize;

use crate::units::{self, Renamed};

/// The built-in demo pond (also in `host-sim/examples/demo-pond.toml`).
pub const DEMO_POND: &str = include_str!("../examples/demo-pond.toml");

/// A problem found loading a pond file.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// Dotted path in the file (`outlet.gate.width_m`), or empty for the whole file.
    pub path: String,
    /// What is wrong, starting with the value where there is one.
    pub message: String,
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.path.is_empty() {
            f.write_str(&self.message)
        } else {
            write!(f, "{}{}", self.path, self.message)
        }
    }
}

/// A loaded, validated pond.
#[derive(Debug, Clone)]
pub struct Pond {
    /// Name from the file.
    pub name: String,
    /// The raw SI numbers (what `pack` writes).
    pub spec: PondSpec,
    /// The validated configuration.
    pub config: PondConfig,
    /// The pre-retrofit fixed outlet, if described (the fixed-outlet baseline).
    pub existing: Option<Outlet>,
    /// The configuration with the pre-retrofit outlet in place of the new one (its gate kept
    /// closed), for the fixed-outlet baseline's plant; None without an `[existing]` outlet.
    pub existing_config: Option<PondConfig>,
    /// Sub-catchment names, in order.
    pub sub_names: Vec<String>,
    /// Warnings: legal but suspicious.
    pub warnings: Vec<String>,
}

// ---------------------------------------------------------------- file layout (serde)

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct File {
    format: u32,
    #[serde(default)]
    name: String,
    #[serde(default, rename = "units")]
    _units: Option<String>,
    storage: StorageFile,
    outlet: OutletFile,
    #[serde(default)]
    existing: Option<ExistingFile>,
    levels: LevelsFile,
    permit: PermitFile,
    catchment: CatchmentFile,
    idf: IdfFile,
    #[serde(default)]
    control: ControlFile,
    sensors: SensorsFile,
    safe: SafeFile,
}

#[derive(Debug, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
enum StorageFile {
    SurveyArea {
        #[serde(default)]
        method: Option<String>,
        stage_area_m_m2: Vec<[f32; 2]>,
    },
    SurveyVolume {
        stage_volume_m_m3: Vec<[f32; 2]>,
    },
    Basin {
        floor_m: f32,
        length_m: f32,
        width_m: f32,
        side_slope_h_per_v: f32,
        depth_m: f32,
    },
}

/// One `[[outlet.fixed]]` or `[[existing.fixed]]` entry, by its `kind`. Each kind is read
/// as its own struct (see [`read_structure`]), so that a wrong value names its key
/// (`outlet.fixed[0].diameter_m`); serde's tagged enums buffer the entry and lose the path.
#[derive(Debug)]
enum StructureFile {
    CircularOrifice(CircularOrificeFile),
    RectangularOrifice(RectangularOrificeFile),
    RectangularWeir(RectangularWeirFile),
    VNotchWeir(VNotchWeirFile),
    BroadCrestedWeir(BroadCrestedWeirFile),
    RiserCircular(RiserCircularFile),
    RiserRectangular(RiserRectangularFile),
    Spillway(SpillwayFile),
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct CircularOrificeFile {
    invert_m: f32,
    diameter_m: f32,
    cd: f32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RectangularOrificeFile {
    invert_m: f32,
    width_m: f32,
    height_m: f32,
    cd: f32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RectangularWeirFile {
    crest_m: f32,
    width_m: f32,
    cd: f32,
    #[serde(default)]
    end_contractions: u8,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct VNotchWeirFile {
    crest_m: f32,
    angle_deg: f32,
    cd: f32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct BroadCrestedWeirFile {
    crest_m: f32,
    width_m: f32,
    cd: f32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RiserCircularFile {
    crest_m: f32,
    diameter_m: f32,
    weir_cd: f32,
    orifice_cd: f32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RiserRectangularFile {
    crest_m: f32,
    length_m: f32,
    width_m: f32,
    weir_cd: f32,
    orifice_cd: f32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SpillwayFile {
    crest_m: f32,
    bottom_width_m: f32,
    side_slope_h_per_v: f32,
    cd: f32,
}

/// The structure kinds a pond file may name, as it names them.
const STRUCTURE_KINDS: &str = "circular-orifice, rectangular-orifice, rectangular-weir, \
    v-notch-weir, broad-crested-weir, riser-circular, riser-rectangular or spillway";

/// Reads one structure entry at `path` (`outlet.fixed[2]`): its `kind`, then the kind's own
/// settings, each error naming the key it is about.
fn read_structure(v: &toml::Value, path: &str) -> Result<StructureFile, Problem> {
    let Some(table) = v.as_table() else {
        return Err(problem(
            path,
            format!(": must be a table with a kind, found a {}", v.type_str()),
        ));
    };
    let mut t = table.clone();
    let kind = match t.remove("kind") {
        Some(toml::Value::String(k)) => k,
        Some(other) => {
            return Err(problem(
                format!("{path}.kind"),
                format!(" = {other}: must be one of {STRUCTURE_KINDS}"),
            ));
        }
        None => {
            return Err(problem(
                format!("{path}.kind"),
                format!(": missing; write one of {STRUCTURE_KINDS}"),
            ));
        }
    };
    let entry = toml::Value::Table(t);
    Ok(match kind.as_str() {
        "circular-orifice" => StructureFile::CircularOrifice(read_at(entry, path)?),
        "rectangular-orifice" => StructureFile::RectangularOrifice(read_at(entry, path)?),
        "rectangular-weir" => StructureFile::RectangularWeir(read_at(entry, path)?),
        "v-notch-weir" => StructureFile::VNotchWeir(read_at(entry, path)?),
        "broad-crested-weir" => StructureFile::BroadCrestedWeir(read_at(entry, path)?),
        "riser-circular" => StructureFile::RiserCircular(read_at(entry, path)?),
        "riser-rectangular" => StructureFile::RiserRectangular(read_at(entry, path)?),
        "spillway" => StructureFile::Spillway(read_at(entry, path)?),
        other => {
            return Err(problem(
                format!("{path}.kind"),
                format!(" = \"{other}\": must be one of {STRUCTURE_KINDS}"),
            ));
        }
    })
}

/// Reads `tree`, the part of the file at `at` ("" for the whole file), through
/// serde_path_to_error, so that a value of the wrong type names its key.
fn read_at<T: serde::de::DeserializeOwned>(tree: toml::Value, at: &str) -> Result<T, Problem> {
    serde_path_to_error::deserialize(tree).map_err(
        |e: serde_path_to_error::Error<toml::de::Error>| {
            let key = e.path().to_string();
            let msg = e.inner().message().trim().to_string();
            let whole = key == "." || key.is_empty();
            match (at.is_empty(), whole) {
                (true, true) => problem("", format!("pond file: {msg}")),
                (true, false) => problem(key, format!(": {msg}")),
                (false, true) => problem(at, format!(": {msg}")),
                (false, false) => problem(format!("{at}.{key}"), format!(": {msg}")),
            }
        },
    )
}

/// Every entry of a structure list, the problems of all of them together.
fn read_structures(
    list: &[toml::Value],
    at: &str,
    problems: &mut Vec<Problem>,
) -> Vec<StructureFile> {
    let mut out = Vec::new();
    for (i, v) in list.iter().enumerate() {
        match read_structure(v, &format!("{at}[{i}]")) {
            Ok(s) => out.push(s),
            Err(p) => problems.push(p),
        }
    }
    out
}

impl StructureFile {
    fn spec(&self) -> StructureSpec {
        match *self {
            StructureFile::CircularOrifice(CircularOrificeFile {
                invert_m,
                diameter_m,
                cd,
            }) => StructureSpec::CircularOrifice {
                invert_m,
                diameter_m,
                cd,
            },
            StructureFile::RectangularOrifice(RectangularOrificeFile {
                invert_m,
                width_m,
                height_m,
                cd,
            }) => StructureSpec::RectangularOrifice {
                invert_m,
                width_m,
                height_m,
                cd,
            },
            StructureFile::RectangularWeir(RectangularWeirFile {
                crest_m,
                width_m,
                cd,
                end_contractions,
            }) => StructureSpec::RectangularWeir {
                crest_m,
                width_m,
                cd,
                end_contractions,
            },
            StructureFile::VNotchWeir(VNotchWeirFile {
                crest_m,
                angle_deg,
                cd,
            }) => StructureSpec::VNotchWeir {
                crest_m,
                angle_deg,
                cd,
            },
            StructureFile::BroadCrestedWeir(BroadCrestedWeirFile {
                crest_m,
                width_m,
                cd,
            }) => StructureSpec::BroadCrestedWeir {
                crest_m,
                width_m,
                cd,
            },
            StructureFile::RiserCircular(RiserCircularFile {
                crest_m,
                diameter_m,
                weir_cd,
                orifice_cd,
            }) => StructureSpec::RiserCircular {
                crest_m,
                diameter_m,
                weir_cd,
                orifice_cd,
            },
            StructureFile::RiserRectangular(RiserRectangularFile {
                crest_m,
                length_m,
                width_m,
                weir_cd,
                orifice_cd,
            }) => StructureSpec::RiserRectangular {
                crest_m,
                length_m,
                width_m,
                weir_cd,
                orifice_cd,
            },
            StructureFile::Spillway(SpillwayFile {
                crest_m,
                bottom_width_m,
                side_slope_h_per_v,
                cd,
            }) => StructureSpec::Spillway {
                crest_m,
                bottom_width_m,
                side_slope_h_per_v,
                cd,
            },
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct GateFile {
    sill_m: f32,
    width_m: f32,
    max_opening_m: f32,
    #[serde(default = "default_cc")]
    cc: f32,
    #[serde(default = "default_cv")]
    cv: f32,
}

fn default_cc() -> f32 {
    holdback_core::hydraulics::gate::DEFAULT_CONTRACTION_CC
}
fn default_cv() -> f32 {
    0.98
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct OutletFile {
    /// Read entry by entry ([`read_structure`]).
    #[serde(default)]
    fixed: Vec<toml::Value>,
    gate: GateFile,
    #[serde(default)]
    tailwater_m: Option<f32>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ExistingFile {
    /// Read entry by entry ([`read_structure`]).
    fixed: Vec<toml::Value>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct LevelsFile {
    normal_m: f32,
    crest_m: f32,
    freeboard_m: f32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct PermitFile {
    release_m3s: f32,
    #[serde(default = "default_margin")]
    margin: f32,
}

fn default_margin() -> f32 {
    0.05
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct CatchmentFile {
    #[serde(default = "default_dt")]
    dt_s: u32,
    sub: Vec<SubFile>,
}

fn default_dt() -> u32 {
    60
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SubFile {
    #[serde(default)]
    name: String,
    c: f32,
    area_ha: f32,
    #[serde(default)]
    tc_min: Option<f32>,
    #[serde(default)]
    flow_path: Option<FlowPathFile>,
    #[serde(default)]
    kirpich: Option<KirpichFile>,
    #[serde(default)]
    lag_s: u32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct KirpichFile {
    length_m: f32,
    slope_m_m: f32,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct FlowPathFile {
    #[serde(default)]
    inlet_min: f32,
    #[serde(default)]
    segment: Vec<SegmentFile>,
}

#[derive(Debug, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
enum SegmentFile {
    Velocity {
        length_m: f32,
        velocity_m_s: f32,
    },
    Pipe {
        length_m: f32,
        diameter_m: f32,
        slope_m_m: f32,
        manning_n: f32,
    },
    Rectangular {
        length_m: f32,
        width_m: f32,
        depth_m: f32,
        slope_m_m: f32,
        manning_n: f32,
    },
    Trapezoidal {
        length_m: f32,
        bottom_width_m: f32,
        depth_m: f32,
        side_slope_h_per_v: f32,
        slope_m_m: f32,
        manning_n: f32,
    },
    /// A reach whose travel time is the Kirpich time for its length and slope.
    Kirpich {
        length_m: f32,
        slope_m_m: f32,
    },
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct IdfFile {
    #[serde(default)]
    min_duration_min: Option<f32>,
    #[serde(default)]
    max_duration_min: Option<f32>,
    #[serde(default)]
    curve: Vec<CurveFile>,
    #[serde(default)]
    table: Option<IdfTableFile>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct CurveFile {
    return_period_yr: f32,
    form: String,
    a_mm_h: f32,
    b: f32,
    #[serde(default)]
    c: Option<f32>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct IdfTableFile {
    durations_min: Vec<f32>,
    return_periods_yr: Vec<f32>,
    /// One row per duration, one column per return period.
    intensities_mm_h: Vec<Vec<f32>>,
}

#[derive(Debug, Deserialize, Default)]
#[serde(deny_unknown_fields, default)]
struct ControlFile {
    step_s: Option<u32>,
    forecast_every_s: Option<u32>,
    horizon_s: Option<u32>,
    forecast_step_s: Option<u32>,
    persistence_s: Option<u32>,
    design_return_period_yr: Option<f32>,
    drawdown_target_s: Option<u32>,
    min_detention_s: Option<u32>,
    inter_event_s: Option<u32>,
    deadband_m: Option<f32>,
    min_move_interval_s: Option<u32>,
    max_rate_m_s: Option<f32>,
    max_moves_per_hour: Option<u16>,
    manual_max_s: Option<u32>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SensorsFile {
    stage_min_m: f32,
    stage_max_m: f32,
    #[serde(default = "d_rate")]
    max_stage_rate_m_s: f32,
    #[serde(default = "d_spike")]
    spike_m: f32,
    #[serde(default = "d_stuck")]
    stuck_s: u32,
    #[serde(default = "d_missing")]
    missing_steps: u16,
    #[serde(default = "d_tol")]
    position_tolerance_m: f32,
    #[serde(default = "d_timeout")]
    move_timeout_s: u32,
    #[serde(default)]
    gauge: GaugeFile,
}

fn d_rate() -> f32 {
    0.01
}
fn d_spike() -> f32 {
    0.15
}
fn d_stuck() -> u32 {
    3600
}
fn d_missing() -> u16 {
    6
}
fn d_tol() -> f32 {
    0.02
}
fn d_timeout() -> u32 {
    300
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields, default)]
struct GaugeFile {
    bucket_mm: f32,
    spread_cap_s: u32,
    max_intensity_mm_h: f32,
    clog_after_s: u32,
    inter_event_dry_s: u32,
}

impl Default for GaugeFile {
    fn default() -> Self {
        let g = holdback_core::rain::GaugeSettings::default();
        GaugeFile {
            bucket_mm: g.bucket_mm,
            spread_cap_s: g.spread_cap_s,
            max_intensity_mm_h: g.max_intensity_mm_h,
            clog_after_s: g.clog_after_s,
            inter_event_dry_s: g.inter_event_dry_s,
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SafeFile {
    safe_opening_m: f32,
}

// ---------------------------------------------------------------- loading

fn problem(path: impl Into<String>, message: impl Into<String>) -> Problem {
    Problem {
        path: path.into(),
        message: message.into(),
    }
}

/// The rain gauge's settings, which the core names without their table.
const GAUGE_KEYS: [&str; 7] = [
    "bucket_mm",
    "clog_after_s",
    "inter_event_dry_s",
    "max_intensity_mm_h",
    "spread_cap_s",
    "window_s",
    "windows_s",
];

fn invalid(prefix: &str, e: &Invalid) -> Problem {
    let field = match e.field {
        "runoff_coefficient" => "c",
        other => other,
    };
    let path = if prefix.is_empty() && GAUGE_KEYS.contains(&field) {
        format!("sensors.gauge.{field}")
    } else if prefix.is_empty() || field.contains('.') {
        field.to_string()
    } else {
        format!("{prefix}.{field}")
    };
    problem(path, format!(" = {}: {}", e.value, e.rule))
}

/// Maps a core build error to the pond file's path.
fn map_build(part: SpecPart, error: &BuildError) -> Problem {
    use holdback_core::config::ConfigError;
    use holdback_core::hydraulics::HydraulicsError;
    use holdback_core::rain::RainError;
    use holdback_core::runoff::RunoffError;
    use holdback_core::storage::StorageError;
    let prefix = match part {
        SpecPart::Config => String::new(),
        other => other.to_string(),
    };
    match error {
        BuildError::Storage(StorageError::BadValue { row, invalid: e }) => {
            invalid(&format!("storage[{row}]"), e)
        }
        BuildError::Storage(StorageError::Geometry(e)) => invalid("storage", e),
        BuildError::Hydraulics(HydraulicsError::Invalid(e)) => invalid(&prefix, e),
        BuildError::Runoff(RunoffError::Invalid(e)) => invalid(&prefix, e),
        BuildError::Rain(RainError::Invalid(e)) => invalid("idf", e),
        BuildError::Config(ConfigError::Invalid(e)) => invalid("", e),
        BuildError::Config(ConfigError::Inconsistent { field, value, rule }) => {
            problem(*field, format!(" = {value}: {rule}"))
        }
        other => problem(prefix, format!(": {other}")),
    }
}

/// An IDF coefficient the core refused, with the path of the curve and key it came from
/// (the core names the coefficient, `sherman_a`, not the curve): the first curve of the
/// formula's form whose coefficient holds the refused value.
fn idf_problem(idf: &IdfFile, e: &Invalid) -> Problem {
    let key = match e.field {
        "talbot_a" | "sherman_a" | "power_a" => Some("a_mm_h"),
        "talbot_b_min" | "sherman_b_min" | "power_b" => Some("b"),
        "sherman_c" => Some("c"),
        _ => None,
    };
    let form = match e.field.split('_').next() {
        Some("power") => "power-law",
        Some(other) => other,
        None => "",
    };
    let same = |v: f32| v.to_bits() == e.value.to_bits() || (v.is_nan() && e.value.is_nan());
    let found = key.and_then(|k| {
        idf.curve
            .iter()
            .position(|c| {
                c.form == form
                    && match k {
                        "a_mm_h" => same(c.a_mm_h),
                        "b" => same(c.b),
                        _ => c.c.is_some_and(same),
                    }
            })
            .map(|i| format!("idf.curve[{i}].{k}"))
    });
    match found {
        Some(path) => problem(path, format!(" = {}: {}", e.value, e.rule)),
        None => invalid("idf", e),
    }
}

fn tc_s(i: usize, s: &SubFile) -> Result<u32, Problem> {
    let path = format!("catchment.sub[{i}]");
    let given = [
        s.tc_min.is_some(),
        s.flow_path.is_some(),
        s.kirpich.is_some(),
    ]
    .iter()
    .filter(|b| **b)
    .count();
    if given != 1 {
        return Err(problem(
            path,
            ": give exactly one of tc_min, [flow_path] or [kirpich]",
        ));
    }
    let runoff = |p: &str, e: holdback_core::runoff::RunoffError| match e {
        holdback_core::runoff::RunoffError::Invalid(inv) => invalid(p, &inv),
        other => problem(p.to_string(), format!(": {other}")),
    };
    if let Some(t) = s.tc_min {
        return TimeOfConcentration::from_min(t)
            .map(|t| t.s())
            .map_err(|e| runoff(&path, e));
    }
    if let Some(k) = &s.kirpich {
        let p = format!("{path}.kirpich");
        return TimeOfConcentration::kirpich_si(k.length_m, k.slope_m_m)
            .map(|t| t.s())
            .map_err(|e| runoff(&p, e));
    }
    let fp = s
        .flow_path
        .as_ref()
        .ok_or_else(|| problem(&path, ": no Tc"))?;
    let mut segs = Vec::new();
    for (j, seg) in fp.segment.iter().enumerate() {
        let p = format!("{path}.flow_path.segment[{j}]");
        let built = match *seg {
            SegmentFile::Velocity {
                length_m,
                velocity_m_s,
            } => Segment::at_velocity(length_m, velocity_m_s),
            SegmentFile::Pipe {
                length_m,
                diameter_m,
                slope_m_m,
                manning_n,
            } => Segment::full_pipe(length_m, diameter_m, slope_m_m, manning_n),
            SegmentFile::Rectangular {
                length_m,
                width_m,
                depth_m,
                slope_m_m,
                manning_n,
            } => Segment::rectangular(length_m, width_m, depth_m, slope_m_m, manning_n),
            SegmentFile::Trapezoidal {
                length_m,
                bottom_width_m,
                depth_m,
                side_slope_h_per_v,
                slope_m_m,
                manning_n,
            } => Segment::trapezoidal(
                length_m,
                bottom_width_m,
                depth_m,
                side_slope_h_per_v,
                slope_m_m,
                manning_n,
            ),
            SegmentFile::Kirpich {
                length_m,
                slope_m_m,
            } => TimeOfConcentration::kirpich_si(length_m, slope_m_m)
                .and_then(|t| Segment::at_velocity(length_m, length_m / t.s() as f32)),
        };
        segs.push(built.map_err(|e| runoff(&p, e))?);
    }
    let inlet = fp.inlet_min * 60.0;
    if !(inlet.is_finite() && (0.0..=172_800.0).contains(&inlet)) {
        return Err(problem(
            format!("{path}.flow_path.inlet_min"),
            format!(" = {}: must be in [0, 2880] min", fp.inlet_min),
        ));
    }
    FlowPath::new(inlet.round() as u32, &segs)
        .map(|p| p.tc().s())
        .map_err(|e| runoff(&format!("{path}.flow_path"), e))
}

fn vec_of<T: Clone, const N: usize>(
    items: &[T],
    path: &str,
) -> Result<heapless::Vec<T, N>, Problem> {
    heapless::Vec::from_slice(items).map_err(|_| {
        problem(
            path,
            format!(": {} items given, at most {N} fit", items.len()),
        )
    })
}

fn rows(rows: &[[f32; 2]], path: &str) -> Result<heapless::Vec<(f32, f32), 32>, Problem> {
    let v: Vec<(f32, f32)> = rows.iter().map(|r| (r[0], r[1])).collect();
    vec_of(&v, path)
}

fn idf_spec(f: &IdfFile) -> Result<IdfSpec, Problem> {
    match (&f.table, f.curve.is_empty()) {
        (Some(t), true) => {
            let nt = t.return_periods_yr.len();
            let mut cells = Vec::new();
            for (i, row) in t.intensities_mm_h.iter().enumerate() {
                if row.len() != nt {
                    return Err(problem(
                        format!("idf.table.intensities_mm_h[{i}]"),
                        format!(
                            ": {} values, one per return period ({nt}) needed",
                            row.len()
                        ),
                    ));
                }
                cells.extend_from_slice(row);
            }
            if t.intensities_mm_h.len() != t.durations_min.len() {
                return Err(problem(
                    "idf.table.intensities_mm_h",
                    format!(
                        ": {} rows, one per duration ({}) needed",
                        t.intensities_mm_h.len(),
                        t.durations_min.len()
                    ),
                ));
            }
            Ok(IdfSpec::Table {
                durations_min: vec_of(&t.durations_min, "idf.table.durations_min")?,
                return_periods_years: vec_of(&t.return_periods_yr, "idf.table.return_periods_yr")?,
                intensities_mm_h: vec_of(&cells, "idf.table.intensities_mm_h")?,
            })
        }
        (None, false) => {
            let mut curves = Vec::new();
            for (i, c) in f.curve.iter().enumerate() {
                let p = format!("idf.curve[{i}]");
                let form = match (c.form.as_str(), c.c) {
                    ("talbot", None) => FormulaSpec::Talbot {
                        a: c.a_mm_h,
                        b: c.b,
                    },
                    ("sherman", Some(cc)) => FormulaSpec::Sherman {
                        a: c.a_mm_h,
                        b: c.b,
                        c: cc,
                    },
                    ("power-law", None) => FormulaSpec::PowerLaw {
                        a: c.a_mm_h,
                        b: c.b,
                    },
                    ("sherman", None) => return Err(problem(p, ": sherman needs c")),
                    ("talbot" | "power-law", Some(_)) => {
                        return Err(problem(format!("{p}.c"), ": only sherman takes c"));
                    }
                    (other, _) => {
                        return Err(problem(
                            format!("{p}.form"),
                            format!(" = \"{other}\": must be talbot, sherman or power-law"),
                        ));
                    }
                };
                curves.push((c.return_period_yr, form));
            }
            Ok(IdfSpec::Curves {
                min_duration_min: f.min_duration_min.unwrap_or(5.0),
                max_duration_min: f.max_duration_min.unwrap_or(1440.0),
                curves: vec_of(&curves, "idf.curve")?,
            })
        }
        _ => Err(problem(
            "idf",
            ": give either [[idf.curve]] entries or one [idf.table], not both",
        )),
    }
}

fn control_spec(c: &ControlFile) -> ControlSpec {
    let d = ControlSettings::default();
    ControlSpec {
        step_s: c.step_s.unwrap_or(d.step_s),
        forecast_every_s: c.forecast_every_s.unwrap_or(d.forecast_every_s),
        horizon_s: c.horizon_s.unwrap_or(d.horizon_s),
        forecast_step_s: c.forecast_step_s.unwrap_or(d.forecast_step_s),
        persistence_s: c.persistence_s.unwrap_or(d.persistence_s),
        design_return_period_yr: c
            .design_return_period_yr
            .unwrap_or(d.design_return_period_yr),
        drawdown_target_s: c.drawdown_target_s.unwrap_or(d.drawdown_target_s),
        min_detention_s: c.min_detention_s.unwrap_or(d.min_detention_s),
        inter_event_s: c.inter_event_s.unwrap_or(d.inter_event_s),
        deadband_m: c.deadband_m.unwrap_or(d.deadband_m),
        min_move_interval_s: c.min_move_interval_s.unwrap_or(d.min_move_interval_s),
        max_rate_m_s: c.max_rate_m_s.unwrap_or(d.max_rate_m_s),
        max_moves_per_hour: c.max_moves_per_hour.unwrap_or(d.max_moves_per_hour),
        manual_max_s: c.manual_max_s.unwrap_or(d.manual_max_s),
    }
}

/// Errors: every problem found (at least one). On success the pond with its warnings.
pub fn load_str(text: &str) -> Result<Pond, Vec<Problem>> {
    let mut tree: toml::Value = toml::from_str(text).map_err(|e| vec![toml_problem(&e)])?;
    let units_name = tree
        .get("units")
        .and_then(|u| u.as_str())
        .unwrap_or("si")
        .to_string();
    let renamed: Vec<Renamed> = match units_name.as_str() {
        "si" => Vec::new(),
        "us" => units::us_to_si(&mut tree).map_err(|e| vec![problem("", e)])?,
        other => {
            return Err(vec![problem(
                "units",
                format!(" = \"{other}\": must be \"si\" or \"us\""),
            )]);
        }
    };
    // Through serde_path_to_error, so that a value of the wrong type names its key
    // ("outlet.gate.width_m: invalid type: string ..."), which the bare TOML error does not
    // once the text has become a tree.
    let file: File = read_at(tree, "").map_err(|mut p| {
        us_note(&mut p, &renamed);
        vec![p]
    })?;
    let mut pond = build(&file).map_err(|mut ps| {
        for p in &mut ps {
            us_note(p, &renamed);
        }
        ps
    })?;
    pond.warnings = warnings(&file, &pond);
    Ok(pond)
}

fn us_note(p: &mut Problem, renamed: &[Renamed]) {
    if let Some(r) = renamed.iter().find(|r| p.path == r.si_path) {
        p.message
            .push_str(&format!(" (value in SI; the file's key is {})", r.us_key));
    }
}

fn toml_problem(e: &toml::de::Error) -> Problem {
    let msg = e.message().trim().to_string();
    problem("", format!("pond file: {msg}"))
}

fn build(f: &File) -> Result<Pond, Vec<Problem>> {
    if f.format != 1 {
        return Err(vec![problem(
            "format",
            format!(" = {}: this build reads format 1", f.format),
        )]);
    }
    let one = |p: Problem| vec![p];
    let mut problems = Vec::new();
    let outlet_fixed = read_structures(&f.outlet.fixed, "outlet.fixed", &mut problems);
    let existing_fixed = f
        .existing
        .as_ref()
        .map(|ex| read_structures(&ex.fixed, "existing.fixed", &mut problems));
    if !problems.is_empty() {
        return Err(problems);
    }
    let storage = match &f.storage {
        StorageFile::SurveyArea {
            method,
            stage_area_m_m2,
        } => {
            let r = rows(stage_area_m_m2, "storage.stage_area_m_m2").map_err(one)?;
            match method.as_deref() {
                None | Some("frustum") => StorageSpec::AreasFrustum(r),
                Some("average-end-area") => StorageSpec::AreasAverageEnd(r),
                Some(other) => {
                    return Err(one(problem(
                        "storage.method",
                        format!(" = \"{other}\": must be frustum or average-end-area"),
                    )));
                }
            }
        }
        StorageFile::SurveyVolume { stage_volume_m_m3 } => {
            StorageSpec::Volumes(rows(stage_volume_m_m3, "storage.stage_volume_m_m3").map_err(one)?)
        }
        StorageFile::Basin {
            floor_m,
            length_m,
            width_m,
            side_slope_h_per_v,
            depth_m,
        } => StorageSpec::Basin {
            floor_m: *floor_m,
            length_m: *length_m,
            width_m: *width_m,
            side_slope_h_per_v: *side_slope_h_per_v,
            depth_m: *depth_m,
        },
    };
    let fixed: Vec<StructureSpec> = outlet_fixed.iter().map(StructureFile::spec).collect();
    let g = &f.outlet.gate;
    let mut subs = Vec::new();
    for (i, s) in f.catchment.sub.iter().enumerate() {
        match tc_s(i, s) {
            Ok(tc_s) => subs.push(SubCatchmentSpec {
                c: s.c,
                area_ha: s.area_ha,
                tc_s,
                lag_s: s.lag_s,
            }),
            Err(p) => problems.push(p),
        }
    }
    if !problems.is_empty() {
        return Err(problems);
    }
    let sn = &f.sensors;
    let spec = PondSpec {
        storage,
        outlet: OutletSpec {
            fixed: vec_of(&fixed, "outlet.fixed").map_err(one)?,
            gate: GateSpec {
                sill_m: g.sill_m,
                width_m: g.width_m,
                max_opening_m: g.max_opening_m,
                cc: g.cc,
                cv: g.cv,
            },
            tailwater_m: f.outlet.tailwater_m,
        },
        normal_m: f.levels.normal_m,
        crest_m: f.levels.crest_m,
        freeboard_m: f.levels.freeboard_m,
        permit_m3s: f.permit.release_m3s,
        permit_margin: f.permit.margin,
        catchment: CatchmentSpec {
            dt_s: f.catchment.dt_s,
            subs: vec_of(&subs, "catchment.sub").map_err(one)?,
        },
        idf: idf_spec(&f.idf).map_err(one)?,
        control: control_spec(&f.control),
        sensors: SensorSpec {
            stage_min_m: sn.stage_min_m,
            stage_max_m: sn.stage_max_m,
            max_stage_rate_m_s: sn.max_stage_rate_m_s,
            spike_m: sn.spike_m,
            stuck_s: sn.stuck_s,
            missing_steps: sn.missing_steps,
            position_tolerance_m: sn.position_tolerance_m,
            move_timeout_s: sn.move_timeout_s,
            bucket_mm: sn.gauge.bucket_mm,
            spread_cap_s: sn.gauge.spread_cap_s,
            max_intensity_mm_h: sn.gauge.max_intensity_mm_h,
            clog_after_s: sn.gauge.clog_after_s,
            inter_event_dry_s: sn.gauge.inter_event_dry_s,
        },
        safe_opening_m: f.safe.safe_opening_m,
    };
    let map_pack = |e: PackError| match e {
        PackError::Build {
            error: BuildError::Rain(holdback_core::rain::RainError::Invalid(inv)),
            ..
        } => idf_problem(&f.idf, &inv),
        PackError::Build { part, error } => map_build(part, &error),
        other => problem("", other.to_string()),
    };
    // The parts that stand alone are built one by one first, so that a file with mistakes
    // in several of them hears of all of them at once; the rules between parts (levels
    // against the storage, steps against the catchment, ...) follow once the parts are
    // sound, and are all reported too.
    // Within the outlet, every structure and the gate on their own first: the outlet's build
    // stops at its first refusal, which would hide the mistakes after it.
    let mut problems = outlet_problems(&spec, existing_fixed.as_deref());
    let parts = [
        spec.build_storage().err(),
        if problems.is_empty() {
            spec.build_outlet().err()
        } else {
            None
        },
        spec.build_catchment().err(),
        spec.build_idf().err(),
    ];
    problems.extend(parts.into_iter().flatten().map(map_pack));
    if !problems.is_empty() {
        return Err(problems);
    }
    // Then every rule between the parts, all of them (the core's build stops at the first).
    spec.each_problem(&mut |e| problems.push(map_pack(e)));
    if !problems.is_empty() {
        return Err(problems);
    }
    let config = spec.build().map_err(|e| one(map_pack(e)))?;
    let existing = match &existing_fixed {
        None => None,
        Some(ex) => {
            // Each structure passed `outlet_problems` already; an error here is the list's.
            let list = ex
                .iter()
                .map(|s| s.spec().build())
                .collect::<Result<Vec<FixedStructure>, _>>()
                .map_err(|e| one(problem("existing.fixed", format!(": {e}"))))?;
            Some(
                Outlet::new(&list, None, f.outlet.tailwater_m)
                    .map_err(|e| one(problem("existing", format!(": {e}"))))?,
            )
        }
    };
    let existing_config = match &existing_fixed {
        None => None,
        Some(ex) => {
            let mut s = spec.clone();
            s.outlet.fixed.clear();
            for st in ex {
                s.outlet
                    .fixed
                    .push(st.spec())
                    .map_err(|_| one(problem("existing.fixed", ": at most 8 structures")))?;
            }
            Some(
                s.build()
                    .map_err(|e| one(problem("existing", format!(": {e}"))))?,
            )
        }
    };
    Ok(Pond {
        name: f.name.clone(),
        spec,
        config,
        existing,
        existing_config,
        sub_names: f.catchment.sub.iter().map(|s| s.name.clone()).collect(),
        warnings: Vec::new(),
    })
}

/// The refusals of each fixed structure (of the outlet, and of the existing outlet when
/// given) and of the gate, each on its own, with their paths in the pond file.
fn outlet_problems(spec: &PondSpec, existing: Option<&[StructureFile]>) -> Vec<Problem> {
    let structure = |i: usize, s: &StructureSpec| {
        s.build().err().map(|e| {
            let part = SpecPart::Structure(u8::try_from(i).unwrap_or(u8::MAX));
            map_build(part, &BuildError::Hydraulics(e))
        })
    };
    let mut problems: Vec<Problem> = spec
        .outlet
        .fixed
        .iter()
        .enumerate()
        .filter_map(|(i, s)| structure(i, s))
        .collect();
    if let Err(e) = spec.outlet.gate.build() {
        problems.push(map_build(SpecPart::Gate, &BuildError::Hydraulics(e)));
    }
    for (i, s) in existing.unwrap_or_default().iter().enumerate() {
        if let Some(mut p) = structure(i, &s.spec()) {
            p.path = p.path.replacen("outlet.fixed[", "existing.fixed[", 1);
            problems.push(p);
        }
    }
    problems
}

/// Time (s) to drain from `from_m` to within 1 cm of the normal level with the gate fully
/// open and no inflow, routed with the core's level-pool step; None if it takes longer than
/// `limit_s`.
pub fn drain_time_s(cfg: &PondConfig, from_m: f32, limit_s: u32) -> Option<u32> {
    let outlet = cfg.outlet();
    let open = outlet.at(outlet.max_opening_m());
    let pond = cfg.storage();
    let target = cfg.levels().normal_m + 0.01;
    let mut s = pond.storage_m3(from_m);
    let dt = 60;
    let mut t = 0u32;
    while t < limit_s {
        if pond.stage_m(s) <= target {
            return Some(t);
        }
        s = routing::step(pond, &open, s, Inflow::steady(0.0), dt).storage_m3;
        t += dt;
    }
    (pond.stage_m(s) <= target).then_some(t)
}

fn warnings(f: &File, pond: &Pond) -> Vec<String> {
    let cfg = &pond.config;
    let mut w = Vec::new();
    let crest = cfg.levels().crest_m;
    let limit = cfg.stage_limit_m();
    let permit = cfg.permit().release_m3s;
    if let Some(ex) = &pond.existing {
        let q = ex.fixed_discharge_m3s(crest);
        if permit > q {
            w.push(format!(
                "permit.release_m3s = {permit}: above what the existing fixed outlet passes at \
                 the crest ({q:.3} m3/s); the permit does not limit this pond"
            ));
        }
    }
    let c = cfg.control();
    if c.persistence_s > c.horizon_s {
        w.push(format!(
            "control.persistence_s = {}: longer than control.horizon_s = {}; the forecast \
             assumes the rain of the moment lasts over its whole horizon",
            c.persistence_s, c.horizon_s
        ));
    }
    // A tenth of the working depth: common practice, no source.
    let depth = cfg.levels().crest_m - cfg.levels().normal_m;
    if c.deadband_m > 0.1 * depth {
        w.push(format!(
            "control.deadband_m = {}: more than a tenth of the depth from normal to crest \
             ({depth:.2} m); the gate will answer the stage coarsely",
            c.deadband_m
        ));
    }
    let target = cfg.control().drawdown_target_s;
    match drain_time_s(cfg, limit, target.saturating_mul(4)) {
        Some(t) if t <= target => {}
        Some(t) => w.push(format!(
            "control.drawdown_target_s = {target}: unreachable, draining from crest - \
             freeboard ({limit:.2} m) with the gate fully open takes {:.1} h",
            t as f64 / 3600.0
        )),
        None => w.push(format!(
            "control.drawdown_target_s = {target}: unreachable, the pond does not drain from \
             crest - freeboard ({limit:.2} m) to the normal level within {:.0} h with the gate \
             fully open",
            target as f64 * 4.0 / 3600.0
        )),
    }
    let has_spillway =
        cfg.outlet().fixed().iter().any(|s| {
            matches!(s, FixedStructure::Spillway(_)) && (s.invert_m() - crest).abs() <= 0.01
        });
    if !has_spillway {
        w.push(format!(
            "levels.crest_m = {crest}: no spillway in outlet.fixed has its crest there; \
             overtopping flow is not modelled"
        ));
    }
    let safe = cfg.safe().safe_opening_m;
    let q_safe = cfg.outlet().discharge_m3s(limit, safe);
    if q_safe > permit {
        w.push(format!(
            "safe.safe_opening_m = {safe}: releases {q_safe:.3} m3/s at crest - freeboard, \
             above the permit ({permit} m3/s)"
        ));
    }
    let top = cfg.storage().top_m();
    if crest > top {
        w.push(format!(
            "levels.crest_m = {crest}: above the top of the stage-storage table ({top}); \
             storage there is extrapolated with vertical walls"
        ));
    }
    if f.existing.is_none() {
        w.push(
            "existing: no pre-retrofit outlet described; the fixed-outlet baseline is skipped"
                .to_string(),
        );
    }
    w
}

/// Return period of the storage check when `control.design_return_period_yr` is unset, years
/// (common practice, no source).
pub const DEFAULT_CHECK_RETURN_PERIOD_YR: f32 = 10.0;

/// The routed storage a design storm needs against the storage the pond has.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StorageCheck {
    /// Return period used, years.
    pub return_period_yr: f32,
    /// Critical rain duration (the largest routed storage), s.
    pub critical_duration_s: u32,
    /// Detention storage needed above the normal level at that duration, m³.
    pub needed_m3: f32,
    /// Storage available between the normal level and crest − freeboard, m³.
    pub available_m3: f32,
    /// Peak stage of that routing, m.
    pub peak_stage_m: f32,
}

impl StorageCheck {
    /// One line of text for `check`.
    pub fn line(&self) -> String {
        format!(
            "storage: {:.0} m3 needed above the normal level ({}-year, critical duration {} \
             min, routed at release = min(permit, full-open capacity)); {:.0} m3 available up \
             to crest - freeboard",
            self.needed_m3,
            self.return_period_yr,
            self.critical_duration_s / 60,
            self.available_m3
        )
    }

    /// The warning when the pond is too small for its permit at the design return period.
    pub fn warning(&self) -> Option<String> {
        (self.needed_m3 > self.available_m3).then(|| {
            format!(
                "storage: the {}-year storm of {} min needs {:.0} m3 of detention at the \
                 permit, more than the {:.0} m3 between the normal level and crest - freeboard \
                 (peak stage {:.2} m): expect releases above the permit or overtopping",
                self.return_period_yr,
                self.critical_duration_s / 60,
                self.needed_m3,
                self.available_m3,
                self.peak_stage_m
            )
        })
    }
}

/// The storage check of `holdback check` ([`holdback_core::sizing`]): each rain duration from
/// 10 min to 24 h (10-min grid) of the design return period is routed through the pond with
/// the release of a perfect controller, `min(permit, full-open capacity)`, from the normal
/// level; the largest detention storage is compared with the storage between the normal
/// level and crest − freeboard.
pub fn storage_check(pond: &Pond) -> Result<StorageCheck, String> {
    use holdback_core::sizing::{DurationGrid, SizingCase};
    let cfg = &pond.config;
    let t = match cfg.control().design_return_period_yr {
        x if x > 0.0 => x,
        _ => DEFAULT_CHECK_RETURN_PERIOD_YR,
    };
    let catchment = pond.spec.build_catchment().map_err(|e| e.to_string())?;
    let case = SizingCase::new(cfg.idf(), t, &catchment, cfg.permit().release_m3s)
        .map_err(|e| e.to_string())?;
    let grid = DurationGrid::new(600, 24 * 3600, 600).map_err(|e| e.to_string())?;
    let open = cfg.outlet().at(cfg.outlet().max_opening_m());
    let release = case.capped(&open);
    let pond_ss = cfg.storage();
    let s0 = pond_ss.storage_m3(cfg.levels().normal_m);
    let p = case
        .routed(pond_ss, &release, s0, 60, &grid)
        .map_err(|e| e.to_string())?;
    Ok(StorageCheck {
        return_period_yr: t,
        critical_duration_s: p.duration_s,
        needed_m3: p.detention_m3,
        available_m3: pond_ss.storage_m3(cfg.stage_limit_m()) - s0,
        peak_stage_m: p.peak_stage_m,
    })
}

/// Reads and loads a pond file from disk.
pub fn load_path(path: &std::path::Path) -> Result<Pond, Vec<Problem>> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        vec![problem(
            "",
            format!("cannot read pond file {}: {e}", path.display()),
        )]
    })?;
    load_str(&text)
}

/// One setting to change in a pond file before it is loaded: a dotted key as the file writes
/// it (`control.deadband_m`, `outlet.fixed[1].cd`) and a TOML value (`0.05`, `"frustum"`).
#[derive(Debug, Clone, PartialEq)]
pub struct Override {
    /// The dotted key, with `[i]` for an entry of an array of tables.
    pub key: String,
    /// The value, as TOML.
    pub value: String,
}

impl Override {
    /// Reads `KEY=VALUE`.
    pub fn parse(s: &str) -> Result<Self, String> {
        let (k, v) = s
            .split_once('=')
            .ok_or_else(|| format!("{s:?}: write KEY=VALUE (e.g. control.deadband_m=0.05)"))?;
        Ok(Self {
            key: k.trim().to_string(),
            value: v.trim().to_string(),
        })
    }
}

impl fmt::Display for Override {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}={}", self.key, self.value)
    }
}

/// Sets one dotted key of a TOML tree; the table that holds it must exist in the file (the
/// key itself may be new, as optional keys often are).
fn set_key(tree: &mut toml::Value, o: &Override) -> Result<(), Problem> {
    let value: toml::Value = toml::from_str::<toml::Table>(&format!("v = {}", o.value))
        .ok()
        .and_then(|mut t| t.remove("v"))
        .ok_or_else(|| problem(&o.key, format!(" = {}: not a TOML value", o.value)))?;
    let parts: Vec<&str> = o.key.split('.').collect();
    let Some((last, path)) = parts.split_last() else {
        return Err(problem(&o.key, ": empty key"));
    };
    let mut here = tree;
    for part in path {
        let (name, index) = match part.split_once('[') {
            Some((n, rest)) => {
                let i = rest
                    .strip_suffix(']')
                    .and_then(|i| i.parse::<usize>().ok())
                    .ok_or_else(|| problem(&o.key, format!(": {part:?} is not NAME[INDEX]")))?;
                (n, Some(i))
            }
            None => (*part, None),
        };
        let next = here
            .get_mut(name)
            .ok_or_else(|| problem(&o.key, format!(": the file has no {name:?} here")))?;
        here = match index {
            None => next,
            Some(i) => next.get_mut(i).ok_or_else(|| {
                problem(&o.key, format!(": the file has no entry {i} of {name:?}"))
            })?,
        };
    }
    let table = here
        .as_table_mut()
        .ok_or_else(|| problem(&o.key, ": does not lead to a table of the file"))?;
    table.insert((*last).to_string(), value);
    Ok(())
}

/// [`load_str`] of `text` with `overrides` applied first, each checked like the rest of the
/// file (a refused value names its key).
pub fn load_str_with(text: &str, overrides: &[Override]) -> Result<Pond, Vec<Problem>> {
    if overrides.is_empty() {
        return load_str(text);
    }
    let mut tree: toml::Value = toml::from_str(text).map_err(|e| vec![toml_problem(&e)])?;
    for o in overrides {
        set_key(&mut tree, o).map_err(|p| vec![p])?;
    }
    let changed = toml::to_string(&tree).map_err(|e| vec![problem("", e.to_string())])?;
    load_str(&changed)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn demo_pond_loads() {
        let p = load_str(DEMO_POND).unwrap();
        assert!(p.existing.is_some());
        assert_eq!(p.sub_names.len(), 3);
    }

    #[test]
    fn gate_width_error_names_the_path() {
        let bad = DEMO_POND.replace("width_m = 0.60", "width_m = -0.4");
        let e = load_str(&bad).unwrap_err();
        assert_eq!(
            e[0].to_string(),
            "outlet.gate.width_m = -0.4: must be a finite length in (0, 1000] m"
        );
    }

    /// Every refusal names the key as the operator wrote it: a value of the wrong type
    /// (before: no path at all once the text was a tree), a gauge setting (before: bare
    /// `bucket_mm`) and an IDF coefficient (before: the core's `idf.sherman_a`, no curve).
    #[test]
    fn refusals_name_the_key_in_the_file() {
        let cases = [
            (
                DEMO_POND.replace("width_m = 0.60", "width_m = \"wide\""),
                "outlet.gate.width_m: invalid type: string \"wide\", expected f32",
            ),
            (
                DEMO_POND.replace("bucket_mm = 0.2", "bucket_mm = -1.0"),
                "sensors.gauge.bucket_mm = -1: must be a finite number > 0",
            ),
            (
                DEMO_POND.replacen("a_mm_h = 850.0", "a_mm_h = -850.0", 1),
                "idf.curve[0].a_mm_h = -850: must be a finite number > 0",
            ),
            (
                DEMO_POND.replace("deadband_m = 0.01", "deadband_m = 10.0"),
                "control.deadband_m = 10: must be below levels.crest_m - levels.normal_m",
            ),
        ];
        for (text, want) in cases {
            let e = load_str(&text).unwrap_err();
            assert_eq!(e[0].to_string(), want);
        }
    }

    /// A structure entry's mistakes name their key (before: "pond file: invalid type ..."
    /// with no path, because serde buffers a tagged entry): a wrong type, an unknown or
    /// missing kind, a key the kind does not take, a missing setting; the mistakes of every
    /// entry, outlet and existing, are reported together.
    #[test]
    fn structure_entries_name_their_keys() {
        let cases = [
            (
                DEMO_POND.replace("diameter_m = 0.10", "diameter_m = \"0.10\""),
                vec!["outlet.fixed[0].diameter_m: invalid type: string \"0.10\", expected f32"],
            ),
            (
                DEMO_POND.replace("diameter_m = 0.10", "diam = 0.10"),
                vec![
                    "outlet.fixed[0].diam: unknown field `diam`, expected one of `invert_m`, \
                     `diameter_m`, `cd`",
                ],
            ),
            (
                DEMO_POND.replacen("kind = \"circular-orifice\"", "kind = \"round-hole\"", 1),
                vec!["outlet.fixed[0].kind = \"round-hole\": must be one of circular-orifice"],
            ),
            (
                DEMO_POND.replacen("kind = \"circular-orifice\"\n", "", 1),
                vec!["outlet.fixed[0].kind: missing; write one of circular-orifice"],
            ),
            (
                DEMO_POND.replacen("cd = 0.95\n", "", 1),
                vec!["outlet.fixed[1]: missing field `cd`"],
            ),
            (
                DEMO_POND.replace("bottom_width_m = 6.0", "bottom_width_m = \"six\""),
                vec![
                    "outlet.fixed[1].bottom_width_m: invalid type",
                    "existing.fixed[1].bottom_width_m: invalid type",
                ],
            ),
        ];
        for (text, want) in cases {
            let e = load_str(&text).unwrap_err();
            let got: Vec<String> = e.iter().map(ToString::to_string).collect();
            assert_eq!(got.len(), want.len(), "{got:?}");
            for (g, w) in got.iter().zip(&want) {
                assert!(g.starts_with(w), "{g:?} does not start with {w:?}");
            }
        }
    }

    /// Overrides change the setting they name and are checked like the file: a new value
    /// reaches the config, a bad one is refused by its key, a key whose table the file lacks
    /// is refused.
    #[test]
    fn overrides_change_and_are_checked_like_the_file() {
        let o = |s: &str| Override::parse(s).unwrap();
        let p = load_str_with(
            DEMO_POND,
            &[o("control.deadband_m=0.05"), o("outlet.fixed[0].cd = 0.62")],
        )
        .unwrap();
        assert_eq!(p.config.control().deadband_m, 0.05);
        match p.config.outlet().fixed().first() {
            Some(holdback_core::hydraulics::FixedStructure::CircularOrifice(c)) => {
                assert_eq!(c.cd(), 0.62)
            }
            other => panic!("{other:?}"),
        }
        let e = load_str_with(DEMO_POND, &[o("outlet.gate.width_m=-1")]).unwrap_err();
        assert!(
            e[0].to_string().starts_with("outlet.gate.width_m = -1"),
            "{e:?}"
        );
        let e = load_str_with(DEMO_POND, &[o("contrl.deadband_m=0.05")]).unwrap_err();
        assert_eq!(
            e[0].to_string(),
            "contrl.deadband_m: the file has no \"contrl\" here"
        );
        let e = load_str_with(DEMO_POND, &[o("outlet.fixed[9].cd=0.6")]).unwrap_err();
        assert!(e[0].to_string().contains("no entry 9"), "{e:?}");
        assert!(Override::parse("control.deadband_m").is_err());
    }

    /// Mistakes in several parts of a file are all reported in one go (before, only the
    /// first was, so fixing a file took one run per mistake).
    /// The refusals of a pond file that must not load, as printed.
    fn refusals(text: &str) -> Vec<String> {
        load_str(text)
            .unwrap_err()
            .iter()
            .map(ToString::to_string)
            .collect()
    }

    #[test]
    fn mistakes_in_several_parts_are_reported_together() {
        let bad = DEMO_POND
            .replace("width_m = 0.60", "width_m = -0.4")
            .replacen("a_mm_h = 850.0", "a_mm_h = -850.0", 1)
            .replacen("c = 0.85", "c = 1.7", 1);
        let e = refusals(&bad);
        assert_eq!(e.len(), 3, "{e:?}");
        assert!(
            e.iter()
                .any(|p| p.starts_with("outlet.gate.width_m = -0.4")),
            "{e:?}"
        );
        assert!(
            e.iter()
                .any(|p| p.starts_with("idf.curve[0].a_mm_h = -850")),
            "{e:?}"
        );
        assert!(
            e.iter().any(|p| p.starts_with("catchment.sub[0].c = 1.7")),
            "{e:?}"
        );
    }

    /// Within the outlet too, every mistake at once: two bad structures, the gate and a bad
    /// structure of the existing outlet (before, the outlet's build stopped at the first and
    /// the existing outlet was checked only after everything else had passed).
    #[test]
    fn every_bad_structure_and_the_gate_are_reported_together() {
        let bad = DEMO_POND
            .replacen("diameter_m = 0.10", "diameter_m = -0.1", 1)
            .replacen("cd = 0.95", "cd = 1.5", 1)
            .replace("width_m = 0.60", "width_m = -0.4")
            .replacen("diameter_m = 0.45", "diameter_m = 0.0", 1);
        let e = refusals(&bad);
        assert_eq!(e.len(), 4, "{e:?}");
        for want in [
            "outlet.fixed[0].diameter_m = -0.1",
            "outlet.fixed[1].cd = 1.5",
            "outlet.gate.width_m = -0.4",
            "existing.fixed[0].diameter_m = 0",
        ] {
            assert!(e.iter().any(|p| p.starts_with(want)), "{want}: {e:?}");
        }
    }

    /// The rules between parts (levels against the storage, steps against the catchment,
    /// sensor range against the crest, safe opening against the gate) are all reported in
    /// one run, each naming its key, and a zero period is reported once, as zero, not again
    /// as not dividing the runoff step.
    #[test]
    fn every_rule_between_parts_is_reported_together() {
        let bad = DEMO_POND
            .replace("normal_m = 41.00", "normal_m = 40.50")
            .replace("margin = 0.05", "margin = 0.7")
            .replace("step_s = 10\n", "step_s = 7\n")
            .replace("stage_max_m = 44.50", "stage_max_m = 43.00")
            .replace("safe_opening_m = 0.09", "safe_opening_m = 0.9")
            .replace("inter_event_s = 21600", "inter_event_s = 0");
        let e = refusals(&bad);
        for want in [
            "levels.normal_m = 40.5: must not be below the floor",
            "permit.margin = 0.7: must be in [0, 0.5]",
            "safe.safe_opening_m = 0.9: must be in [0, the gate's max_opening_m]",
            "control.inter_event_s = 0: must be > 0 s",
            "control.step_s = 7: must divide",
            "sensors.stage_max_m = 43: must be above levels.crest_m",
        ] {
            assert!(e.iter().any(|p| p.starts_with(want)), "{want}: {e:?}");
        }
        assert_eq!(e.len(), 6, "{e:?}");
        // The zero step alone: reported as zero, and nothing else about steps.
        let e = refusals(&DEMO_POND.replace("step_s = 10\n", "step_s = 0\n"));
        assert_eq!(e, ["control.step_s = 0: must be > 0 s"], "{e:?}");
    }

    /// Legal but suspicious control settings are warned about, not refused.
    #[test]
    fn suspicious_control_settings_are_warned_about() {
        let p = load_str(&DEMO_POND.replace("persistence_s = 1800", "persistence_s = 4000000000"))
            .unwrap();
        assert!(
            p.warnings
                .iter()
                .any(|w| w.starts_with("control.persistence_s = 4000000000: longer than")),
            "{:?}",
            p.warnings
        );
        let p = load_str(&DEMO_POND.replace("deadband_m = 0.01", "deadband_m = 0.5")).unwrap();
        assert!(
            p.warnings
                .iter()
                .any(|w| w.starts_with("control.deadband_m = 0.5: more than a tenth")),
            "{:?}",
            p.warnings
        );
        assert!(
            !load_str(DEMO_POND)
                .unwrap()
                .warnings
                .iter()
                .any(|w| w.starts_with("control.")),
        );
    }
}
