//! The packed device configuration: a pond description as the raw numbers the constructors
//! take, postcard-encoded in a versioned frame with a CRC-32, and the way back to a
//! validated [`PondConfig`].
//!
//! The desktop tool fills a [`PondSpec`] from a pond file (converting units once), and writes
//! [`pack`]'s bytes to the device. The device reads them with [`unpack`], which checks the
//! frame, decodes the spec and builds the [`PondConfig`] through the same constructors the
//! desktop uses, so a config that validates on the desktop validates identically on the
//! device. [`PondSpec::build`] is that one path from numbers to a config.
//!
//! ## Frame
//!
//! | bytes | content |
//! |---|---|
//! | 0..4 | magic `HBPD` |
//! | 4 | [`PACK_VERSION`] |
//! | 5..n−4 | postcard encoding of [`PondSpec`] |
//! | n−4..n | CRC-32/ISO-HDLC ([`crate::event::crc32`]) of bytes 0..n−4, little-endian |
//!
//! Invariants: a frame is at most [`MAX_PACKED_LEN`] bytes; every list has a fixed capacity
//! (heapless, capacity overflow is a decode error); [`unpack`] never panics on any input and
//! either returns a config that passed every constructor or an error. Encoding is
//! deterministic: the same spec gives the same bytes, so `pack(unpack_spec(b)) == b` for any
//! `b` that unpacks. postcard is positional: a new field means a new [`PACK_VERSION`].
//!
//! Units: SI as everywhere in the core (m, m², m³, m³/s, ha, mm/h, s, years).

use core::fmt;

use heapless::Vec;
use serde::{Deserialize, Serialize};

use crate::config::{
    ConfigError, ControlSettings, IdfModel, Levels, Permit, PondConfig, PondParts, SafeSettings,
    SensorLimits,
};
use crate::hydraulics::{
    BroadCrestedWeir, CircularOrifice, FixedStructure, HydraulicsError, MAX_FIXED, Outlet,
    RectangularOrifice, RectangularWeir, Riser, SluiceGate, Spillway, VNotchWeir,
};
use crate::rain::{
    GaugeSettings, IdfCurves, IdfFormula, IdfTable, MAX_DURATIONS, MAX_RETURN_PERIODS, RainError,
};
use crate::runoff::hydrograph::MAX_SUB_CATCHMENTS;
use crate::runoff::{
    AreaHa, Catchment, RunoffCoefficient, RunoffError, SubCatchment, TimeAreaResponse,
    TimeOfConcentration,
};
use crate::storage::{BasinGeometry, MAX_ROWS, StageStorage, StorageError, VolumeMethod};

/// Version byte of the frame; bumped whenever [`PondSpec`]'s layout changes.
pub const PACK_VERSION: u8 = 1;

/// The first four bytes of every packed configuration.
pub const PACK_MAGIC: [u8; 4] = *b"HBPD";

/// Largest packed frame, bytes (the largest spec encodes to well under this).
pub const MAX_PACKED_LEN: usize = 4096;

const HEADER_LEN: usize = 5;
const CRC_LEN: usize = 4;

/// How the stage–storage relation is given.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum StorageSpec {
    /// Survey rows of (stage_m, area_m2), volumes by the frustum formula.
    AreasFrustum(Vec<(f32, f32), MAX_ROWS>),
    /// Survey rows of (stage_m, area_m2), volumes by average end areas.
    AreasAverageEnd(Vec<(f32, f32), MAX_ROWS>),
    /// Rows of (stage_m, volume_m3).
    Volumes(Vec<(f32, f32), MAX_ROWS>),
    /// A rectangular basin with uniform side slopes.
    Basin {
        /// Floor stage, m.
        floor_m: f32,
        /// Bottom length, m.
        length_m: f32,
        /// Bottom width, m.
        width_m: f32,
        /// Side slope, H:V.
        side_slope_h_per_v: f32,
        /// Depth of the sides, m.
        depth_m: f32,
    },
}

/// One fixed outlet structure, as its constructor's arguments (m, coefficients).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // Each field is the constructor argument of the same name.
pub enum StructureSpec {
    /// [`CircularOrifice::new`].
    CircularOrifice {
        invert_m: f32,
        diameter_m: f32,
        cd: f32,
    },
    /// [`RectangularOrifice::new`].
    RectangularOrifice {
        invert_m: f32,
        width_m: f32,
        height_m: f32,
        cd: f32,
    },
    /// [`RectangularWeir::new`].
    RectangularWeir {
        crest_m: f32,
        width_m: f32,
        cd: f32,
        end_contractions: u8,
    },
    /// [`VNotchWeir::new`].
    VNotchWeir {
        crest_m: f32,
        angle_deg: f32,
        cd: f32,
    },
    /// [`BroadCrestedWeir::new`].
    BroadCrestedWeir { crest_m: f32, width_m: f32, cd: f32 },
    /// [`Riser::circular`].
    RiserCircular {
        crest_m: f32,
        diameter_m: f32,
        weir_cd: f32,
        orifice_cd: f32,
    },
    /// [`Riser::rectangular`].
    RiserRectangular {
        crest_m: f32,
        length_m: f32,
        width_m: f32,
        weir_cd: f32,
        orifice_cd: f32,
    },
    /// [`Spillway::new`].
    Spillway {
        crest_m: f32,
        bottom_width_m: f32,
        side_slope_h_per_v: f32,
        cd: f32,
    },
}

impl StructureSpec {
    /// Builds the structure (its constructor's validation).
    pub fn build(&self) -> Result<FixedStructure, HydraulicsError> {
        Ok(match *self {
            StructureSpec::CircularOrifice {
                invert_m,
                diameter_m,
                cd,
            } => CircularOrifice::new(invert_m, diameter_m, cd)?.into(),
            StructureSpec::RectangularOrifice {
                invert_m,
                width_m,
                height_m,
                cd,
            } => RectangularOrifice::new(invert_m, width_m, height_m, cd)?.into(),
            StructureSpec::RectangularWeir {
                crest_m,
                width_m,
                cd,
                end_contractions,
            } => RectangularWeir::new(crest_m, width_m, cd, end_contractions)?.into(),
            StructureSpec::VNotchWeir {
                crest_m,
                angle_deg,
                cd,
            } => VNotchWeir::new(crest_m, angle_deg, cd)?.into(),
            StructureSpec::BroadCrestedWeir {
                crest_m,
                width_m,
                cd,
            } => BroadCrestedWeir::new(crest_m, width_m, cd)?.into(),
            StructureSpec::RiserCircular {
                crest_m,
                diameter_m,
                weir_cd,
                orifice_cd,
            } => Riser::circular(crest_m, diameter_m, weir_cd, orifice_cd)?.into(),
            StructureSpec::RiserRectangular {
                crest_m,
                length_m,
                width_m,
                weir_cd,
                orifice_cd,
            } => Riser::rectangular(crest_m, length_m, width_m, weir_cd, orifice_cd)?.into(),
            StructureSpec::Spillway {
                crest_m,
                bottom_width_m,
                side_slope_h_per_v,
                cd,
            } => Spillway::new(crest_m, bottom_width_m, side_slope_h_per_v, cd)?.into(),
        })
    }
}

/// The controlled gate, as [`SluiceGate::new`]'s arguments.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GateSpec {
    /// Sill level, m.
    pub sill_m: f32,
    /// Width, m.
    pub width_m: f32,
    /// Largest opening, m.
    pub max_opening_m: f32,
    /// Contraction coefficient.
    pub cc: f32,
    /// Velocity coefficient.
    pub cv: f32,
}

impl GateSpec {
    /// Builds the gate (its constructor's validation).
    pub fn build(&self) -> Result<SluiceGate, HydraulicsError> {
        SluiceGate::new(
            self.sill_m,
            self.width_m,
            self.max_opening_m,
            self.cc,
            self.cv,
        )
    }
}

/// The outlet: fixed structures, the gate, an optional fixed tailwater.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OutletSpec {
    /// Fixed structures.
    pub fixed: Vec<StructureSpec, MAX_FIXED>,
    /// The controlled gate.
    pub gate: GateSpec,
    /// Fixed tailwater level, m (None = free outfall).
    pub tailwater_m: Option<f32>,
}

/// One sub-catchment with its Tc already resolved to seconds.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SubCatchmentSpec {
    /// Runoff coefficient, [0, 1].
    pub c: f32,
    /// Area, ha.
    pub area_ha: f32,
    /// Time of concentration, s.
    pub tc_s: u32,
    /// Lag from its outlet to the pond, s.
    pub lag_s: u32,
}

/// The catchment: sub-catchments and the time step of its time–area response.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CatchmentSpec {
    /// Time step of the response, s.
    pub dt_s: u32,
    /// The sub-catchments.
    pub subs: Vec<SubCatchmentSpec, MAX_SUB_CATCHMENTS>,
}

/// One IDF formula (t in min, i in mm/h).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // The coefficients of the published forms, see [`IdfFormula`].
pub enum FormulaSpec {
    /// `i = a / (t + b)`.
    Talbot { a: f32, b: f32 },
    /// `i = a / (t + b)^c`.
    Sherman { a: f32, b: f32, c: f32 },
    /// `i = a · t^(−b)`.
    PowerLaw { a: f32, b: f32 },
}

impl From<FormulaSpec> for IdfFormula {
    fn from(f: FormulaSpec) -> Self {
        match f {
            FormulaSpec::Talbot { a, b } => IdfFormula::Talbot { a, b },
            FormulaSpec::Sherman { a, b, c } => IdfFormula::Sherman { a, b, c },
            FormulaSpec::PowerLaw { a, b } => IdfFormula::PowerLaw { a, b },
        }
    }
}

/// The IDF relation, as formulas per return period or a table.
// No heap in the core, so the table is inline (~1 KiB), like `IdfModel`.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum IdfSpec {
    /// One formula per return period, valid over a duration range.
    Curves {
        /// Shortest duration the formulas are valid for, min.
        min_duration_min: f32,
        /// Longest duration, min.
        max_duration_min: f32,
        /// (return period in years, formula), rarest last.
        curves: Vec<(f32, FormulaSpec), MAX_RETURN_PERIODS>,
    },
    /// A table: durations × return periods, row-major by duration.
    Table {
        /// Durations, min.
        durations_min: Vec<f32, MAX_DURATIONS>,
        /// Return periods, years.
        return_periods_years: Vec<f32, MAX_RETURN_PERIODS>,
        /// Intensities, mm/h, one row per duration.
        intensities_mm_h: Vec<f32, { MAX_DURATIONS * MAX_RETURN_PERIODS }>,
    },
}

/// Control settings, as [`ControlSettings`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // Field for field [`ControlSettings`].
pub struct ControlSpec {
    pub step_s: u32,
    pub forecast_every_s: u32,
    pub horizon_s: u32,
    pub forecast_step_s: u32,
    pub persistence_s: u32,
    pub design_return_period_yr: f32,
    pub drawdown_target_s: u32,
    pub min_detention_s: u32,
    pub inter_event_s: u32,
    pub deadband_m: f32,
    pub min_move_interval_s: u32,
    pub max_rate_m_s: f32,
    pub max_moves_per_hour: u16,
    pub manual_max_s: u32,
}

impl From<ControlSpec> for ControlSettings {
    fn from(c: ControlSpec) -> Self {
        ControlSettings {
            step_s: c.step_s,
            forecast_every_s: c.forecast_every_s,
            horizon_s: c.horizon_s,
            forecast_step_s: c.forecast_step_s,
            persistence_s: c.persistence_s,
            design_return_period_yr: c.design_return_period_yr,
            drawdown_target_s: c.drawdown_target_s,
            min_detention_s: c.min_detention_s,
            inter_event_s: c.inter_event_s,
            deadband_m: c.deadband_m,
            min_move_interval_s: c.min_move_interval_s,
            max_rate_m_s: c.max_rate_m_s,
            max_moves_per_hour: c.max_moves_per_hour,
            manual_max_s: c.manual_max_s,
        }
    }
}

impl From<ControlSettings> for ControlSpec {
    fn from(c: ControlSettings) -> Self {
        ControlSpec {
            step_s: c.step_s,
            forecast_every_s: c.forecast_every_s,
            horizon_s: c.horizon_s,
            forecast_step_s: c.forecast_step_s,
            persistence_s: c.persistence_s,
            design_return_period_yr: c.design_return_period_yr,
            drawdown_target_s: c.drawdown_target_s,
            min_detention_s: c.min_detention_s,
            inter_event_s: c.inter_event_s,
            deadband_m: c.deadband_m,
            min_move_interval_s: c.min_move_interval_s,
            max_rate_m_s: c.max_rate_m_s,
            max_moves_per_hour: c.max_moves_per_hour,
            manual_max_s: c.manual_max_s,
        }
    }
}

/// Sensor limits, as [`SensorLimits`] with the gauge settings inline; `noise_m` is not
/// carried and builds as [`SensorLimits::DEFAULT_NOISE_M`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[allow(missing_docs)] // Field for field [`SensorLimits`] and [`GaugeSettings`].
pub struct SensorSpec {
    pub stage_min_m: f32,
    pub stage_max_m: f32,
    pub max_stage_rate_m_s: f32,
    pub spike_m: f32,
    pub stuck_s: u32,
    pub missing_steps: u16,
    pub position_tolerance_m: f32,
    pub move_timeout_s: u32,
    pub bucket_mm: f32,
    pub spread_cap_s: u32,
    pub max_intensity_mm_h: f32,
    pub clog_after_s: u32,
    pub inter_event_dry_s: u32,
}

impl From<SensorSpec> for SensorLimits {
    fn from(s: SensorSpec) -> Self {
        SensorLimits {
            stage_min_m: s.stage_min_m,
            stage_max_m: s.stage_max_m,
            max_stage_rate_m_s: s.max_stage_rate_m_s,
            spike_m: s.spike_m,
            stuck_s: s.stuck_s,
            missing_steps: s.missing_steps,
            // Not carried in pack version 1: the documented default (a new field would need a
            // new PACK_VERSION and a pond-file key).
            noise_m: SensorLimits::DEFAULT_NOISE_M,
            position_tolerance_m: s.position_tolerance_m,
            move_timeout_s: s.move_timeout_s,
            gauge: GaugeSettings {
                bucket_mm: s.bucket_mm,
                spread_cap_s: s.spread_cap_s,
                max_intensity_mm_h: s.max_intensity_mm_h,
                clog_after_s: s.clog_after_s,
                inter_event_dry_s: s.inter_event_dry_s,
            },
        }
    }
}

/// Everything the device needs about one pond, as raw numbers (SI).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PondSpec {
    /// Stage–storage.
    pub storage: StorageSpec,
    /// Outlet.
    pub outlet: OutletSpec,
    /// Normal level, m.
    pub normal_m: f32,
    /// Spillway crest, m.
    pub crest_m: f32,
    /// Freeboard below the crest, m.
    pub freeboard_m: f32,
    /// Permitted release, m³/s.
    pub permit_m3s: f32,
    /// Margin below the permit, fraction.
    pub permit_margin: f32,
    /// Catchment.
    pub catchment: CatchmentSpec,
    /// IDF.
    pub idf: IdfSpec,
    /// Control settings.
    pub control: ControlSpec,
    /// Sensor limits.
    pub sensors: SensorSpec,
    /// The opening held when inputs cannot be trusted, m.
    pub safe_opening_m: f32,
}

/// Which part of a [`PondSpec`] a build error came from (indices from 0).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum SpecPart {
    /// The stage–storage relation.
    Storage,
    /// Fixed structure `n` of the outlet.
    Structure(u8),
    /// The gate.
    Gate,
    /// The outlet as a whole (tailwater, capacity).
    Outlet,
    /// Sub-catchment `n`.
    SubCatchment(u8),
    /// The catchment as a whole (count, time–area response).
    Catchment,
    /// The IDF relation.
    Idf,
    /// The rules of [`PondConfig::new`] (levels, permit, control, sensors, safe settings).
    Config,
}

impl fmt::Display for SpecPart {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SpecPart::Storage => f.write_str("storage"),
            SpecPart::Structure(n) => write!(f, "outlet.fixed[{n}]"),
            SpecPart::Gate => f.write_str("outlet.gate"),
            SpecPart::Outlet => f.write_str("outlet"),
            SpecPart::SubCatchment(n) => write!(f, "catchment.sub[{n}]"),
            SpecPart::Catchment => f.write_str("catchment"),
            SpecPart::Idf => f.write_str("idf"),
            SpecPart::Config => f.write_str("pond"),
        }
    }
}

/// The constructor error a spec part failed with.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum BuildError {
    /// Stage–storage.
    Storage(StorageError),
    /// Outlet or gate.
    Hydraulics(HydraulicsError),
    /// Catchment.
    Runoff(RunoffError),
    /// IDF.
    Rain(RainError),
    /// The rules between the parts.
    Config(ConfigError),
}

impl fmt::Display for BuildError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            BuildError::Storage(e) => e.fmt(f),
            BuildError::Hydraulics(e) => e.fmt(f),
            BuildError::Runoff(e) => e.fmt(f),
            BuildError::Rain(e) => e.fmt(f),
            BuildError::Config(e) => e.fmt(f),
        }
    }
}

/// Why a packed configuration could not be written or read.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum PackError {
    /// Fewer bytes than a header and a CRC.
    TooShort {
        /// Bytes given.
        len: usize,
    },
    /// More bytes than [`MAX_PACKED_LEN`].
    TooLong {
        /// Bytes given.
        len: usize,
    },
    /// The first four bytes are not [`PACK_MAGIC`].
    BadMagic,
    /// A version this code does not read.
    UnsupportedVersion {
        /// The version byte found.
        found: u8,
    },
    /// The CRC does not match the bytes.
    BadCrc {
        /// CRC stored in the frame.
        stored: u32,
        /// CRC computed over the frame.
        computed: u32,
    },
    /// The payload is not a valid encoding (truncated, trailing bytes, list over capacity…).
    Decode,
    /// The caller's buffer is too small for the frame.
    BufferTooSmall,
    /// The spec decoded but a part failed its constructor.
    Build {
        /// Which part.
        part: SpecPart,
        /// The constructor's error.
        error: BuildError,
    },
}

impl fmt::Display for PackError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PackError::TooShort { len } => write!(f, "packed config of {len} bytes: too short"),
            PackError::TooLong { len } => {
                write!(
                    f,
                    "packed config of {len} bytes: more than {MAX_PACKED_LEN}"
                )
            }
            PackError::BadMagic => f.write_str("not a packed pond config (bad magic)"),
            PackError::UnsupportedVersion { found } => write!(
                f,
                "packed config version {found}: this build reads version {PACK_VERSION}"
            ),
            PackError::BadCrc { stored, computed } => write!(
                f,
                "packed config CRC {stored:#010x} does not match the bytes ({computed:#010x})"
            ),
            PackError::Decode => f.write_str("packed config payload does not decode"),
            PackError::BufferTooSmall => f.write_str("buffer too small for the packed config"),
            PackError::Build { part, error } => write!(f, "{part}: {error}"),
        }
    }
}

impl core::error::Error for PackError {}

fn part<E>(part: SpecPart, wrap: impl Fn(E) -> BuildError) -> impl Fn(E) -> PackError {
    move |e| PackError::Build {
        part,
        error: wrap(e),
    }
}

fn index(i: usize) -> u8 {
    u8::try_from(i).unwrap_or(u8::MAX)
}

impl PondSpec {
    /// The stage–storage relation.
    pub fn build_storage(&self) -> Result<StageStorage, PackError> {
        let e = part(SpecPart::Storage, BuildError::Storage);
        match &self.storage {
            StorageSpec::AreasFrustum(rows) => {
                StageStorage::from_areas(rows, VolumeMethod::Frustum).map_err(e)
            }
            StorageSpec::AreasAverageEnd(rows) => {
                StageStorage::from_areas(rows, VolumeMethod::AverageEndArea).map_err(e)
            }
            StorageSpec::Volumes(rows) => StageStorage::from_volumes(rows).map_err(e),
            StorageSpec::Basin {
                floor_m,
                length_m,
                width_m,
                side_slope_h_per_v,
                depth_m,
            } => StageStorage::from_basin(BasinGeometry {
                floor_m: *floor_m,
                length_m: *length_m,
                width_m: *width_m,
                side_slope_h_per_v: *side_slope_h_per_v,
                depth_m: *depth_m,
            })
            .map_err(e),
        }
    }

    /// The outlet with its gate.
    pub fn build_outlet(&self) -> Result<Outlet, PackError> {
        let mut fixed: Vec<FixedStructure, MAX_FIXED> = Vec::new();
        for (i, s) in self.outlet.fixed.iter().enumerate() {
            let st = s
                .build()
                .map_err(part(SpecPart::Structure(index(i)), BuildError::Hydraulics))?;
            fixed.push(st).map_err(|_| PackError::Build {
                part: SpecPart::Outlet,
                error: BuildError::Hydraulics(HydraulicsError::TooManyStructures {
                    capacity: MAX_FIXED,
                }),
            })?;
        }
        let gate = self
            .outlet
            .gate
            .build()
            .map_err(part(SpecPart::Gate, BuildError::Hydraulics))?;
        Outlet::new(&fixed, Some(gate), self.outlet.tailwater_m)
            .map_err(part(SpecPart::Outlet, BuildError::Hydraulics))
    }

    /// The catchment (sub-catchments as given).
    pub fn build_catchment(&self) -> Result<Catchment, PackError> {
        let mut subs: Vec<SubCatchment, MAX_SUB_CATCHMENTS> = Vec::new();
        for (i, s) in self.catchment.subs.iter().enumerate() {
            let e = part(SpecPart::SubCatchment(index(i)), BuildError::Runoff);
            let sub = SubCatchment::new(
                RunoffCoefficient::new(s.c).map_err(&e)?,
                AreaHa::new(s.area_ha).map_err(&e)?,
                TimeOfConcentration::from_s(s.tc_s).map_err(&e)?,
                s.lag_s,
            )
            .map_err(&e)?;
            subs.push(sub).map_err(|_| PackError::Build {
                part: SpecPart::Catchment,
                error: BuildError::Runoff(RunoffError::Capacity {
                    what: "sub-catchments",
                    capacity: MAX_SUB_CATCHMENTS,
                }),
            })?;
        }
        Catchment::new(&subs).map_err(part(SpecPart::Catchment, BuildError::Runoff))
    }

    /// The IDF relation.
    pub fn build_idf(&self) -> Result<IdfModel, PackError> {
        let e = part(SpecPart::Idf, BuildError::Rain);
        match &self.idf {
            IdfSpec::Curves {
                min_duration_min,
                max_duration_min,
                curves,
            } => {
                let mut cs: Vec<(f32, IdfFormula), MAX_RETURN_PERIODS> = Vec::new();
                for &(t, f) in curves {
                    // Same capacity as the source list, so this push cannot fail.
                    let _ = cs.push((t, f.into()));
                }
                Ok(IdfModel::Curves(
                    IdfCurves::new(&cs, *min_duration_min, *max_duration_min).map_err(e)?,
                ))
            }
            IdfSpec::Table {
                durations_min,
                return_periods_years,
                intensities_mm_h,
            } => Ok(IdfModel::Table(
                IdfTable::new(durations_min, return_periods_years, intensities_mm_h).map_err(e)?,
            )),
        }
    }

    /// Builds and validates the whole configuration: each part through its constructor, then
    /// [`PondConfig::new`]. The error names the part.
    // Not inlined (nor `unpack_spec`): LLVM's choice to inline both into `unpack` swings the
    // device image by about a kilobyte from one unrelated change to the next.
    #[inline(never)]
    pub fn build(&self) -> Result<PondConfig, PackError> {
        PondConfig::new(self.parts()?).map_err(part(SpecPart::Config, BuildError::Config))
    }

    /// Every rule between the parts that this spec breaks ([`PondConfig::each_problem`], in
    /// its order), once every part builds on its own; else the first part's error. For a tool
    /// that lists all the mistakes at once, where [`PondSpec::build`] stops at the first.
    pub fn each_problem(&self, report: &mut dyn FnMut(PackError)) {
        match self.parts() {
            Err(e) => report(e),
            Ok(parts) => PondConfig::each_problem(&parts, &mut |e| {
                report(PackError::Build {
                    part: SpecPart::Config,
                    error: BuildError::Config(e),
                });
            }),
        }
    }

    /// The parts of the configuration, each through its constructor (the error names the
    /// part), not yet checked against each other.
    // Always inlined: built in place in `build`'s frame, the parts cost the device's boot
    // 0.7 KiB less stack and 0.3 KiB less flash than returned from a call.
    #[inline(always)]
    fn parts(&self) -> Result<PondParts, PackError> {
        let storage = self.build_storage()?;
        let outlet = self.build_outlet()?;
        let catchment = self.build_catchment()?;
        let response = TimeAreaResponse::from_catchment(&catchment, self.catchment.dt_s)
            .map_err(part(SpecPart::Catchment, BuildError::Runoff))?;
        let idf = self.build_idf()?;
        Ok(PondParts {
            storage,
            outlet,
            levels: Levels {
                normal_m: self.normal_m,
                crest_m: self.crest_m,
                freeboard_m: self.freeboard_m,
            },
            permit: Permit {
                release_m3s: self.permit_m3s,
                margin: self.permit_margin,
            },
            catchment: response,
            idf,
            control: self.control.into(),
            sensors: self.sensors.into(),
            safe: SafeSettings {
                safe_opening_m: self.safe_opening_m,
            },
        })
    }
}

/// Writes `spec` as a packed frame into `buf`; returns the frame length. The spec is not
/// validated here (call [`PondSpec::build`] first); [`unpack`] validates.
pub fn pack(spec: &PondSpec, buf: &mut [u8]) -> Result<usize, PackError> {
    let (head, rest) = buf
        .split_at_mut_checked(HEADER_LEN)
        .ok_or(PackError::BufferTooSmall)?;
    let (magic, version) = head.split_at_mut(4);
    magic.copy_from_slice(&PACK_MAGIC);
    version.fill(PACK_VERSION);
    let payload_len = postcard::to_slice(spec, rest)
        .map_err(|_| PackError::BufferTooSmall)?
        .len();
    let body_len = HEADER_LEN
        .checked_add(payload_len)
        .ok_or(PackError::BufferTooSmall)?;
    let total = body_len
        .checked_add(CRC_LEN)
        .ok_or(PackError::BufferTooSmall)?;
    if total > MAX_PACKED_LEN {
        return Err(PackError::TooLong { len: total });
    }
    let crc = crate::event::crc32(buf.get(..body_len).ok_or(PackError::BufferTooSmall)?);
    buf.get_mut(body_len..total)
        .ok_or(PackError::BufferTooSmall)?
        .copy_from_slice(&crc.to_le_bytes());
    Ok(total)
}

/// Checks the frame (length, magic, version, CRC) and decodes the spec, without validating
/// its numbers.
#[inline(never)]
pub fn unpack_spec(bytes: &[u8]) -> Result<PondSpec, PackError> {
    let len = bytes.len();
    if len > MAX_PACKED_LEN {
        return Err(PackError::TooLong { len });
    }
    let body_len = len
        .checked_sub(CRC_LEN)
        .filter(|&b| b >= HEADER_LEN)
        .ok_or(PackError::TooShort { len })?;
    let (body, crc_bytes) = bytes.split_at(body_len);
    if body.get(..4) != Some(&PACK_MAGIC[..]) {
        return Err(PackError::BadMagic);
    }
    let found = body.get(4).copied().unwrap_or(0);
    if found != PACK_VERSION {
        return Err(PackError::UnsupportedVersion { found });
    }
    let mut stored = [0u8; CRC_LEN];
    stored.copy_from_slice(crc_bytes);
    let stored = u32::from_le_bytes(stored);
    let computed = crate::event::crc32(body);
    if stored != computed {
        return Err(PackError::BadCrc { stored, computed });
    }
    let payload = body.get(HEADER_LEN..).ok_or(PackError::TooShort { len })?;
    let (spec, rest) =
        postcard::take_from_bytes::<PondSpec>(payload).map_err(|_| PackError::Decode)?;
    if !rest.is_empty() {
        return Err(PackError::Decode);
    }
    Ok(spec)
}

/// Reads a packed frame back into a validated [`PondConfig`]. Never panics.
pub fn unpack(bytes: &[u8]) -> Result<PondConfig, PackError> {
    unpack_spec(bytes)?.build()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec() -> PondSpec {
        let mut rows = Vec::new();
        for r in [(10.0, 400.0), (11.0, 900.0), (12.0, 1600.0)] {
            rows.push(r).unwrap();
        }
        let mut fixed = Vec::new();
        fixed
            .push(StructureSpec::CircularOrifice {
                invert_m: 10.0,
                diameter_m: 0.2,
                cd: 0.6,
            })
            .unwrap();
        let mut subs = Vec::new();
        subs.push(SubCatchmentSpec {
            c: 0.6,
            area_ha: 5.0,
            tc_s: 900,
            lag_s: 0,
        })
        .unwrap();
        let mut curves = Vec::new();
        curves
            .push((2.0, FormulaSpec::Talbot { a: 2000.0, b: 10.0 }))
            .unwrap();
        curves
            .push((10.0, FormulaSpec::Talbot { a: 3000.0, b: 10.0 }))
            .unwrap();
        let d = ControlSettings::default();
        PondSpec {
            storage: StorageSpec::AreasFrustum(rows),
            outlet: OutletSpec {
                fixed,
                gate: GateSpec {
                    sill_m: 10.0,
                    width_m: 0.5,
                    max_opening_m: 0.5,
                    cc: 0.61,
                    cv: 0.98,
                },
                tailwater_m: None,
            },
            normal_m: 10.0,
            crest_m: 11.8,
            freeboard_m: 0.3,
            permit_m3s: 0.2,
            permit_margin: 0.05,
            catchment: CatchmentSpec { dt_s: 60, subs },
            idf: IdfSpec::Curves {
                min_duration_min: 5.0,
                max_duration_min: 1440.0,
                curves,
            },
            control: d.into(),
            sensors: SensorSpec {
                stage_min_m: 9.9,
                stage_max_m: 13.0,
                max_stage_rate_m_s: 0.01,
                spike_m: 0.2,
                stuck_s: 3600,
                missing_steps: 6,
                position_tolerance_m: 0.01,
                move_timeout_s: 120,
                bucket_mm: 0.2,
                spread_cap_s: 3600,
                max_intensity_mm_h: 500.0,
                clog_after_s: 1800,
                inter_event_dry_s: 21600,
            },
            safe_opening_m: 0.1,
        }
    }

    #[test]
    fn round_trip_is_byte_exact_and_builds_the_same_config() {
        let s = spec();
        let cfg = s.build().unwrap();
        let mut buf = [0u8; MAX_PACKED_LEN];
        let n = pack(&s, &mut buf).unwrap();
        let back = unpack_spec(&buf[..n]).unwrap();
        assert_eq!(back, s);
        let mut buf2 = [0u8; MAX_PACKED_LEN];
        let n2 = pack(&back, &mut buf2).unwrap();
        assert_eq!(buf[..n], buf2[..n2]);
        assert_eq!(unpack(&buf[..n]).unwrap(), cfg);
    }

    #[test]
    fn corrupt_frames_are_errors() {
        let mut buf = [0u8; MAX_PACKED_LEN];
        let n = pack(&spec(), &mut buf).unwrap();
        let mut b = buf[..n].to_vec();
        b[7] ^= 1;
        assert!(matches!(unpack(&b), Err(PackError::BadCrc { .. })));
        assert_eq!(
            unpack(&buf[..3]).unwrap_err(),
            PackError::TooShort { len: 3 }
        );
        let mut b = buf[..n].to_vec();
        b[4] = 9;
        assert_eq!(
            unpack(&b).unwrap_err(),
            PackError::UnsupportedVersion { found: 9 }
        );
        assert!(matches!(
            pack(&spec(), &mut [0u8; 16]),
            Err(PackError::BufferTooSmall)
        ));
    }

    #[test]
    fn build_errors_name_the_part() {
        let mut s = spec();
        s.outlet.gate.width_m = -0.4;
        let e = s.build().unwrap_err();
        assert_eq!(
            format!("{e}"),
            "outlet.gate: width_m = -0.4: must be a finite length in (0, 1000] m"
        );
    }

    /// `each_problem` lists every rule between the parts that a spec breaks, in the order
    /// `build` checks them, so `build`'s one error is the list's first; a sound spec has none.
    /// (The rules and their order are the ones `PondConfig::new` documents; this checks the
    /// listing, not the rules.)
    #[test]
    fn each_problem_lists_what_build_reports_first() {
        let mut problems = std::vec::Vec::new();
        spec().each_problem(&mut |e| problems.push(e));
        assert!(problems.is_empty(), "{problems:?}");
        let mut s = spec();
        s.permit_margin = 0.7;
        s.safe_opening_m = 5.0;
        s.sensors.stage_max_m = 11.0;
        s.control.step_s = 0;
        let mut problems = std::vec::Vec::new();
        s.each_problem(&mut |e| problems.push(format!("{e}")));
        assert_eq!(
            problems,
            [
                "pond: permit.margin = 0.7: must be in [0, 0.5]",
                "pond: safe.safe_opening_m = 5: must be in [0, the gate's max_opening_m]",
                "pond: control.step_s = 0: must be > 0 s",
                "pond: sensors.stage_max_m = 11: must be above levels.crest_m (the sensor must \
                 read an overtopping pond)",
            ]
        );
        assert_eq!(format!("{}", s.build().unwrap_err()), problems[0]);
        // A part that does not build is the one error: the rules between parts need them all.
        s.outlet.gate.width_m = -0.4;
        let mut problems = std::vec::Vec::new();
        s.each_problem(&mut |e| problems.push(e));
        assert_eq!(problems, [s.build().unwrap_err()]);
    }
}
