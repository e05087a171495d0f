//! Stage–storage: how much water the pond holds at a water-surface stage, and back.
//!
//! Units: stage in m (the survey datum, the same datum as the outlet inverts), plan area in
//! m², storage in m³ measured from the pond floor (the lowest stage of the relation).
//!
//! A [`StageStorage`] is built once and then cannot fail:
//! - [`StageStorage::from_areas`]: a survey table of (stage_m, area_m2) rows; the volume
//!   between rows comes from a [`VolumeMethod`];
//! - [`StageStorage::from_volumes`]: a table of (stage_m, volume_m3) rows, volume linear in
//!   stage between rows (so the plan area is constant within a segment);
//! - [`StageStorage::from_basin`]: a rectangular-bottomed basin with uniform side slopes,
//!   evaluated analytically (the prismoidal volume, exact for this shape).
//!
//! Invariants (checked by the constructors, relied on by routing):
//! - 2 ≤ rows ≤ [`MAX_ROWS`]; stages finite and strictly increasing; areas and volumes finite
//!   and ≥ 0; volumes non-decreasing; the volume at the first row (the floor) is 0;
//! - the area used above the top row is > 0, so the relation is invertible above the top.
//!
//! Evaluation is total:
//! - below the floor, storage and area are 0, and [`StageStorage::stage_m`] of any storage
//!   ≤ 0 is the floor;
//! - above the top row the pond is extended by **vertical walls at the top area**: storage
//!   grows by `top_area · (stage − top)`. This is a documented extrapolation, not survey data:
//!   the controller should treat stages above [`StageStorage::top_m`] as overtopping;
//! - a NaN stage or storage gives NaN (as IEEE 754 does); callers filter sensor values first.
//!
//! The inverse [`StageStorage::stage_m`] is the exact inverse of the interpolation, not a
//! second approximation: within a segment the volume is a polynomial in the local depth and
//! is solved in closed form (quadratic for average-end-area, a cube root for the frustum,
//! linear for volume tables); the basin's cubic is solved by Newton's method started above the
//! root, which converges monotonically for a convex increasing volume (bounded iteration count).
//! Where the volume is flat over a stretch of stage (zero area), the inverse returns the lowest
//! stage of that stretch.

use core::fmt;

use crate::math;
use crate::validate::{self, Invalid};

/// Most rows a survey table may have.
pub const MAX_ROWS: usize = 32;
/// Fewest rows a survey table may have (one segment).
pub const MIN_ROWS: usize = 2;

/// How the volume between two surveyed areas is computed.
///
/// The default is [`VolumeMethod::Frustum`]: a pond with side slopes has a plan area that
/// grows like the square of the depth. The frustum (conic) formula assumes √area linear in
/// stage, which is exact for a square basin with uniform side slopes and for a cone, and close
/// for rectangular basins; the average-end-area formula assumes the area linear in stage and
/// over-estimates the volume of any basin whose area is convex in stage (it is exact only
/// for vertical walls or a wedge). Both agree when the two areas are equal.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum VolumeMethod {
    /// `ΔV = Δh·(A1 + A2)/2`: area linear in stage within a segment.
    AverageEndArea,
    /// `ΔV = Δh/3·(A1 + A2 + √(A1·A2))`: √area linear in stage within a segment.
    #[default]
    Frustum,
}

/// A rectangular-bottomed basin with the same side slope on all four sides.
///
/// Plan area at depth `y` above the floor: `(L + 2zy)(W + 2zy)`; volume (prismoidal formula,
/// exact for this shape): `V = L·W·y + (L + W)·z·y² + 4/3·z²·y³`.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BasinGeometry {
    /// Stage of the flat bottom, m.
    pub floor_m: f32,
    /// Bottom length, m (> 0).
    pub length_m: f32,
    /// Bottom width, m (> 0).
    pub width_m: f32,
    /// Side slope, horizontal run per unit of rise (H:V, e.g. 3 for 3:1; 0 is vertical walls).
    pub side_slope_h_per_v: f32,
    /// Depth from the floor to the top of the sides, m (> 0).
    pub depth_m: f32,
}

impl BasinGeometry {
    /// Plan area at depth `y_m` above the floor (no clamping).
    fn area_at(&self, y_m: f32) -> f32 {
        let run = 2.0 * self.side_slope_h_per_v * y_m;
        (self.length_m + run) * (self.width_m + run)
    }

    /// Volume at depth `y_m` above the floor (no clamping), Horner form of the prismoidal
    /// polynomial.
    fn volume_at(&self, y_m: f32) -> f32 {
        let z = self.side_slope_h_per_v;
        let c1 = self.length_m * self.width_m;
        let c2 = (self.length_m + self.width_m) * z;
        let c3 = 4.0 / 3.0 * z * z;
        y_m * (c1 + y_m * (c2 + y_m * c3))
    }
}

/// Why a stage–storage relation was rejected.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum StorageError {
    /// Fewer rows than [`MIN_ROWS`].
    TooFewRows {
        /// Rows given.
        rows: usize,
        /// Fewest allowed.
        min: usize,
    },
    /// More rows than [`MAX_ROWS`].
    TooManyRows {
        /// Rows given.
        rows: usize,
        /// Most allowed.
        max: usize,
    },
    /// A value in a row is not a number, infinite or negative.
    BadValue {
        /// Row index, from 0.
        row: usize,
        /// Field, value and rule.
        invalid: Invalid,
    },
    /// A stage is not above the stage of the row before it.
    StageNotIncreasing {
        /// Row index, from 0.
        row: usize,
        /// Stage of this row, m.
        stage_m: f32,
        /// Stage of the row before, m.
        previous_stage_m: f32,
    },
    /// A volume is below the volume of the row before it.
    VolumeDecreasing {
        /// Row index, from 0.
        row: usize,
        /// Volume of this row, m³.
        volume_m3: f32,
        /// Volume of the row before, m³.
        previous_volume_m3: f32,
    },
    /// The volume at the floor row (row 0) is not 0; storage is measured from the floor.
    FloorVolumeNotZero {
        /// The floor row's volume, m³.
        volume_m3: f32,
    },
    /// The area used above the top row is 0, so storage above the top would not define a stage.
    NoTopArea {
        /// Index of the top row.
        row: usize,
        /// The area that would be extended upwards (m²).
        area_m2: f32,
    },
    /// A basin dimension is out of range.
    Geometry(Invalid),
}

impl fmt::Display for StorageError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::TooFewRows { rows, min } => {
                write!(
                    f,
                    "stage-storage table has {rows} rows: needs at least {min}"
                )
            }
            Self::TooManyRows { rows, max } => {
                write!(f, "stage-storage table has {rows} rows: at most {max} fit")
            }
            Self::BadValue { row, invalid } => write!(f, "row {row}: {invalid}"),
            Self::StageNotIncreasing {
                row,
                stage_m,
                previous_stage_m,
            } => write!(
                f,
                "row {row}: stage_m = {stage_m}: must be above the previous row's {previous_stage_m}"
            ),
            Self::VolumeDecreasing {
                row,
                volume_m3,
                previous_volume_m3,
            } => write!(
                f,
                "row {row}: volume_m3 = {volume_m3}: must not be below the previous row's \
                 {previous_volume_m3}"
            ),
            Self::FloorVolumeNotZero { volume_m3 } => {
                write!(f, "row 0: volume_m3 = {volume_m3}: must be 0 at the floor")
            }
            Self::NoTopArea { row, area_m2 } => write!(
                f,
                "row {row}: area_m2 = {area_m2}: the area above the top row must be > 0"
            ),
            Self::Geometry(invalid) => write!(f, "basin: {invalid}"),
        }
    }
}

impl core::error::Error for StorageError {}

/// How the area varies within a table segment.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Segment {
    /// Area linear in stage (average-end-area).
    LinearArea,
    /// √area linear in stage (frustum).
    ConicArea,
    /// Volume linear in stage; the row's area is the segment's constant area.
    LinearVolume,
}

/// One table row after validation.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Row {
    stage_m: f32,
    /// Surveyed area (area tables), or the constant area of the segment above this row
    /// (volume tables; the top row carries the last segment's area).
    area_m2: f32,
    /// √area, kept for the frustum so evaluation needs no square root of the row data.
    root_area_m: f32,
    volume_m3: f32,
}

// The table is the large variant by design: no heap, and a pond has one relation.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone, PartialEq)]
enum Relation {
    Table {
        rows: heapless::Vec<Row, MAX_ROWS>,
        segment: Segment,
    },
    Basin {
        geometry: BasinGeometry,
        top_volume_m3: f32,
        top_area_m2: f32,
    },
}

/// A validated stage–storage relation (see the module doc for its invariants).
#[derive(Debug, Clone, PartialEq)]
pub struct StageStorage {
    relation: Relation,
    floor_m: f32,
    top_m: f32,
}

fn check_len(n: usize) -> Result<(), StorageError> {
    if n < MIN_ROWS {
        Err(StorageError::TooFewRows {
            rows: n,
            min: MIN_ROWS,
        })
    } else if n > MAX_ROWS {
        Err(StorageError::TooManyRows {
            rows: n,
            max: MAX_ROWS,
        })
    } else {
        Ok(())
    }
}

fn bad(row: usize) -> impl Fn(Invalid) -> StorageError {
    move |invalid| StorageError::BadValue { row, invalid }
}

impl StageStorage {
    /// From survey rows of `(stage_m, area_m2)`, lowest stage first; the first row is the
    /// floor (storage 0). The volume between rows comes from `method`.
    pub fn from_areas(rows: &[(f32, f32)], method: VolumeMethod) -> Result<Self, StorageError> {
        check_len(rows.len())?;
        let mut out: heapless::Vec<Row, MAX_ROWS> = heapless::Vec::new();
        let mut prev: Option<Row> = None;
        for (i, &(stage_m, area_m2)) in rows.iter().enumerate() {
            let stage_m = validate::finite("stage_m", stage_m).map_err(bad(i))?;
            let area_m2 = validate::non_negative("area_m2", area_m2).map_err(bad(i))?;
            let root_area_m = math::sqrt(area_m2);
            let volume_m3 = match prev {
                None => 0.0,
                Some(p) => {
                    if stage_m <= p.stage_m {
                        return Err(StorageError::StageNotIncreasing {
                            row: i,
                            stage_m,
                            previous_stage_m: p.stage_m,
                        });
                    }
                    let dh = stage_m - p.stage_m;
                    let dv = match method {
                        VolumeMethod::AverageEndArea => dh * 0.5 * (p.area_m2 + area_m2),
                        VolumeMethod::Frustum => {
                            dh / 3.0 * (p.area_m2 + area_m2 + p.root_area_m * root_area_m)
                        }
                    };
                    let v = p.volume_m3 + dv;
                    validate::finite("volume_m3", v).map_err(bad(i))?
                }
            };
            let row = Row {
                stage_m,
                area_m2,
                root_area_m,
                volume_m3,
            };
            out.push(row).map_err(|_| StorageError::TooManyRows {
                rows: rows.len(),
                max: MAX_ROWS,
            })?;
            prev = Some(row);
        }
        let segment = match method {
            VolumeMethod::AverageEndArea => Segment::LinearArea,
            VolumeMethod::Frustum => Segment::ConicArea,
        };
        Self::finish(out, segment)
    }

    /// From rows of `(stage_m, volume_m3)`, lowest stage first; the first row's volume must be
    /// 0 (storage is counted from the floor). Volume is linear in stage between rows, so the
    /// plan area within a segment is its `ΔV/Δh`; above the top the last segment's area holds.
    pub fn from_volumes(rows: &[(f32, f32)]) -> Result<Self, StorageError> {
        check_len(rows.len())?;
        let mut out: heapless::Vec<Row, MAX_ROWS> = heapless::Vec::new();
        let mut prev: Option<(f32, f32)> = None;
        for (i, &(stage_m, volume_m3)) in rows.iter().enumerate() {
            let stage_m = validate::finite("stage_m", stage_m).map_err(bad(i))?;
            let volume_m3 = validate::non_negative("volume_m3", volume_m3).map_err(bad(i))?;
            match prev {
                None if volume_m3 != 0.0 => {
                    return Err(StorageError::FloorVolumeNotZero { volume_m3 });
                }
                None => {}
                Some((ps, pv)) => {
                    if stage_m <= ps {
                        return Err(StorageError::StageNotIncreasing {
                            row: i,
                            stage_m,
                            previous_stage_m: ps,
                        });
                    }
                    if volume_m3 < pv {
                        return Err(StorageError::VolumeDecreasing {
                            row: i,
                            volume_m3,
                            previous_volume_m3: pv,
                        });
                    }
                    let area = validate::finite("area_m2", (volume_m3 - pv) / (stage_m - ps))
                        .map_err(bad(i))?;
                    // The segment's area belongs to its lower row; the top row repeats it.
                    if let Some(last) = out.last_mut() {
                        last.area_m2 = area;
                    }
                }
            }
            let area_m2 = out.last().map_or(0.0, |r| r.area_m2);
            let row = Row {
                stage_m,
                area_m2,
                root_area_m: 0.0,
                volume_m3,
            };
            out.push(row).map_err(|_| StorageError::TooManyRows {
                rows: rows.len(),
                max: MAX_ROWS,
            })?;
            prev = Some((stage_m, volume_m3));
        }
        Self::finish(out, Segment::LinearVolume)
    }

    fn finish(rows: heapless::Vec<Row, MAX_ROWS>, segment: Segment) -> Result<Self, StorageError> {
        let (Some(first), Some(last)) = (rows.first().copied(), rows.last().copied()) else {
            return Err(StorageError::TooFewRows {
                rows: rows.len(),
                min: MIN_ROWS,
            });
        };
        if last.area_m2.is_nan() || last.area_m2 <= 0.0 {
            return Err(StorageError::NoTopArea {
                row: rows.len().saturating_sub(1),
                area_m2: last.area_m2,
            });
        }
        Ok(Self {
            relation: Relation::Table { rows, segment },
            floor_m: first.stage_m,
            top_m: last.stage_m,
        })
    }

    /// From basin geometry, evaluated analytically (exact prismoidal volume).
    pub fn from_basin(geometry: BasinGeometry) -> Result<Self, StorageError> {
        let g = geometry;
        let e = StorageError::Geometry;
        validate::finite("floor_m", g.floor_m).map_err(e)?;
        validate::positive("length_m", g.length_m).map_err(e)?;
        validate::positive("width_m", g.width_m).map_err(e)?;
        validate::non_negative("side_slope_h_per_v", g.side_slope_h_per_v).map_err(e)?;
        validate::positive("depth_m", g.depth_m).map_err(e)?;
        let top_m = validate::finite("floor_m + depth_m", g.floor_m + g.depth_m).map_err(e)?;
        if top_m <= g.floor_m {
            return Err(e(Invalid {
                field: "depth_m",
                value: g.depth_m,
                rule: "must be resolvable above floor_m in f32",
            }));
        }
        let top_volume_m3 = validate::finite("volume_m3", g.volume_at(g.depth_m)).map_err(e)?;
        let top_area_m2 = validate::finite("area_m2", g.area_at(g.depth_m)).map_err(e)?;
        Ok(Self {
            relation: Relation::Basin {
                geometry: g,
                top_volume_m3,
                top_area_m2,
            },
            floor_m: g.floor_m,
            top_m,
        })
    }

    /// Stage of the floor (storage 0), m.
    pub fn floor_m(&self) -> f32 {
        self.floor_m
    }

    /// Stage of the top row (or the top of the basin sides), m.
    pub fn top_m(&self) -> f32 {
        self.top_m
    }

    /// Storage at the top stage, m³.
    pub fn top_storage_m3(&self) -> f32 {
        match &self.relation {
            Relation::Table { rows, .. } => rows.last().map_or(0.0, |r| r.volume_m3),
            Relation::Basin { top_volume_m3, .. } => *top_volume_m3,
        }
    }

    /// Plan area used above the top stage (the vertical-wall extrapolation), m².
    pub fn top_area_m2(&self) -> f32 {
        match &self.relation {
            Relation::Table { rows, .. } => rows.last().map_or(0.0, |r| r.area_m2),
            Relation::Basin { top_area_m2, .. } => *top_area_m2,
        }
    }

    /// Storage (m³) at `stage_m`: 0 at and below the floor; vertical walls above the top.
    pub fn storage_m3(&self, stage_m: f32) -> f32 {
        if stage_m.is_nan() {
            return stage_m;
        }
        if stage_m <= self.floor_m {
            return 0.0;
        }
        if stage_m >= self.top_m {
            return self.top_storage_m3() + self.top_area_m2() * (stage_m - self.top_m);
        }
        match &self.relation {
            Relation::Basin { geometry, .. } => geometry.volume_at(stage_m - self.floor_m),
            Relation::Table { rows, segment } => match segment_at(rows, stage_m) {
                Some((r0, r1)) => segment_volume(*segment, r0, r1, stage_m - r0.stage_m),
                None => self.top_storage_m3(),
            },
        }
    }

    /// Plan area (m²) of the water surface at `stage_m`: 0 below the floor, the top area above
    /// the top. At a row of a volume table the area is that of the segment above it.
    pub fn area_m2(&self, stage_m: f32) -> f32 {
        if stage_m.is_nan() {
            return stage_m;
        }
        if stage_m < self.floor_m {
            return 0.0;
        }
        if stage_m >= self.top_m {
            return self.top_area_m2();
        }
        match &self.relation {
            Relation::Basin { geometry, .. } => geometry.area_at(stage_m - self.floor_m),
            Relation::Table { rows, segment } => match segment_at(rows, stage_m) {
                Some((r0, r1)) => {
                    let x = stage_m - r0.stage_m;
                    let dh = r1.stage_m - r0.stage_m;
                    match segment {
                        Segment::LinearArea => r0.area_m2 + (r1.area_m2 - r0.area_m2) * x / dh,
                        Segment::ConicArea => {
                            let r = r0.root_area_m + (r1.root_area_m - r0.root_area_m) * x / dh;
                            r * r
                        }
                        Segment::LinearVolume => r0.area_m2,
                    }
                }
                None => self.top_area_m2(),
            },
        }
    }

    /// Stage (m) holding `storage_m3`: the exact inverse of [`Self::storage_m3`] (see the
    /// module doc). Storage ≤ 0 gives the floor; storage above the top uses the vertical-wall
    /// extrapolation.
    pub fn stage_m(&self, storage_m3: f32) -> f32 {
        if storage_m3.is_nan() {
            return storage_m3;
        }
        if storage_m3 <= 0.0 {
            return self.floor_m;
        }
        let top_v = self.top_storage_m3();
        if storage_m3 >= top_v {
            let a = self.top_area_m2();
            return self.top_m + (storage_m3 - top_v) / a;
        }
        match &self.relation {
            Relation::Basin { geometry, .. } => self.floor_m + basin_depth(geometry, storage_m3),
            Relation::Table { rows, segment } => {
                let i = rows_below(rows, |r| r.volume_m3 < storage_m3);
                let pair = i
                    .checked_sub(1)
                    .and_then(|i0| Some((rows.get(i0)?, rows.get(i)?)));
                match pair {
                    Some((r0, r1)) => {
                        let dh = r1.stage_m - r0.stage_m;
                        let dv = storage_m3 - r0.volume_m3;
                        let x = segment_depth(*segment, r0, r1, dv);
                        r0.stage_m + math::clamp(x, 0.0, dh)
                    }
                    None => self.top_m,
                }
            }
        }
    }
}

/// How many rows, from the floor up, satisfy `below` (a predicate true for a prefix of the
/// rows: stages and volumes rise row by row): `partition_point`'s answer, by a scan from the
/// floor. A pond spends most of its time in its lowest segments, where the scan ends after a
/// row or two with branches that predict well; the binary search's chain of dependent
/// loads and selects costs the same at every level (measured: about 5 % of a long replay).
#[inline]
fn rows_below(rows: &[Row], below: impl Fn(&Row) -> bool) -> usize {
    rows.iter().position(|r| !below(r)).unwrap_or(rows.len())
}

/// The segment (lower row, upper row) holding `stage_m`, for floor < stage < top.
fn segment_at(rows: &[Row], stage_m: f32) -> Option<(&Row, &Row)> {
    let i = rows_below(rows, |r| r.stage_m <= stage_m);
    let i0 = i.checked_sub(1)?;
    Some((rows.get(i0)?, rows.get(i)?))
}

/// Volume at local depth `x` above the segment's lower row.
fn segment_volume(segment: Segment, r0: &Row, r1: &Row, x: f32) -> f32 {
    let dh = r1.stage_m - r0.stage_m;
    match segment {
        Segment::LinearArea => {
            let a = r0.area_m2 + (r1.area_m2 - r0.area_m2) * x / dh;
            r0.volume_m3 + 0.5 * x * (r0.area_m2 + a)
        }
        Segment::ConicArea => {
            let r = r0.root_area_m + (r1.root_area_m - r0.root_area_m) * x / dh;
            r0.volume_m3 + x / 3.0 * (r0.area_m2 + r * r + r0.root_area_m * r)
        }
        Segment::LinearVolume => r0.volume_m3 + r0.area_m2 * x,
    }
}

/// Local depth above the lower row holding `dv` (> 0) above the lower row's volume.
fn segment_depth(segment: Segment, r0: &Row, r1: &Row, dv: f32) -> f32 {
    let dh = r1.stage_m - r0.stage_m;
    let (num, den) = match segment {
        Segment::LinearArea => {
            // A0·x + s·x²/2 = dv, in the form without cancellation:
            // x = 2·dv / (A0 + √(A0² + 2·s·dv)).
            let s = (r1.area_m2 - r0.area_m2) / dh;
            let disc = r0.area_m2 * r0.area_m2 + 2.0 * s * dv;
            (
                2.0 * dv,
                r0.area_m2 + math::sqrt(if disc > 0.0 { disc } else { 0.0 }),
            )
        }
        Segment::ConicArea => {
            // With r = √A linear (slope c): (r0 + c·x)³ = r0³ + 3·c·dv = R³, and
            // x = (R − r0)/c = 3·dv / (R² + R·r0 + r0²), which also holds for c = 0.
            let r0a = r0.root_area_m;
            let c = (r1.root_area_m - r0a) / dh;
            let cube = r0a * r0a * r0a + 3.0 * c * dv;
            let big_r = if cube > 0.0 { math::cbrt(cube) } else { 0.0 };
            (3.0 * dv, big_r * big_r + big_r * r0a + r0a * r0a)
        }
        Segment::LinearVolume => (dv, r0.area_m2),
    };
    if den > 0.0 { num / den } else { dh }
}

/// Depth above the floor of a basin holding `v` (0 < v < top volume): Newton's method on the
/// convex increasing cubic, started at or above the root so the iterates fall monotonically.
fn basin_depth(g: &BasinGeometry, v: f32) -> f32 {
    // V(y) ≥ L·W·y, so y ≤ v/(L·W); and y ≤ depth because v < top volume.
    let mut y = v / (g.length_m * g.width_m);
    if y.is_nan() || y > g.depth_m {
        y = g.depth_m;
    }
    for _ in 0..24 {
        let f = g.volume_at(y) - v;
        let a = g.area_at(y);
        if a.is_nan() || a <= 0.0 || f.is_nan() || f <= 0.0 {
            break;
        }
        let next = y - f / a;
        if next.is_nan() || next >= y {
            break;
        }
        y = if next > 0.0 { next } else { 0.0 };
    }
    y
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The scan from the floor finds the row the standard library's binary search
    /// (`partition_point`, the reference) finds, for stages and volumes between rows, at
    /// rows, below the floor and above the top, in a table with flat and steep segments.
    #[test]
    fn row_scan_is_partition_point() {
        let t = StageStorage::from_areas(
            &[
                (10.0, 50.0),
                (10.2, 50.0),
                (10.5, 400.0),
                (11.0, 900.0),
                (11.01, 900.0),
                (12.5, 4000.0),
            ],
            VolumeMethod::Frustum,
        )
        .unwrap();
        let Relation::Table { rows, .. } = &t.relation else {
            panic!("a table")
        };
        let mut stages: Vec<f32> = (0..=3000).map(|k| 9.9 + k as f32 * 0.001).collect();
        stages.extend(rows.iter().map(|r| r.stage_m));
        for h in stages {
            let want = rows.partition_point(|r| r.stage_m <= h);
            assert_eq!(rows_below(rows, |r| r.stage_m <= h), want, "stage {h}");
            let v = t.storage_m3(h);
            let want = rows.partition_point(|r| r.volume_m3 < v);
            assert_eq!(rows_below(rows, |r| r.volume_m3 < v), want, "volume {v}");
        }
    }

    /// Vertical walls: 100 m² from 10 m to 12 m holds 100·Δh (volume of a prism, exact).
    #[test]
    fn vertical_walls_hold_area_times_depth_both_methods() {
        for m in [VolumeMethod::AverageEndArea, VolumeMethod::Frustum] {
            let s = StageStorage::from_areas(&[(10.0, 100.0), (11.0, 100.0), (12.0, 100.0)], m)
                .unwrap();
            assert!((s.storage_m3(11.5) - 150.0).abs() < 1e-3);
            assert!((s.stage_m(150.0) - 11.5).abs() < 1e-5);
            assert_eq!(s.storage_m3(9.0), 0.0);
            assert_eq!(s.stage_m(-5.0), 10.0);
            // Above the top: vertical walls at the top area (documented extrapolation).
            assert!((s.storage_m3(13.0) - 300.0).abs() < 1e-3);
            assert!((s.stage_m(300.0) - 13.0).abs() < 1e-5);
        }
    }

    /// A cone (area 0 at the apex, √A linear) is what the frustum formula integrates exactly:
    /// V = A·h/3 (volume of a cone, Euclid XII.10).
    #[test]
    fn frustum_from_zero_area_is_a_cone() {
        let s =
            StageStorage::from_areas(&[(0.0, 0.0), (3.0, 90.0)], VolumeMethod::Frustum).unwrap();
        assert!((s.top_storage_m3() - 90.0).abs() < 1e-4);
        // Half height: area scales with h², volume with h³.
        assert!((s.storage_m3(1.5) - 11.25).abs() < 1e-4);
        assert!((s.stage_m(11.25) - 1.5).abs() < 1e-5);
    }

    #[test]
    fn errors_name_row_field_and_value() {
        let e =
            StageStorage::from_areas(&[(0.0, 1.0), (0.0, 2.0)], VolumeMethod::Frustum).unwrap_err();
        assert_eq!(
            e,
            StorageError::StageNotIncreasing {
                row: 1,
                stage_m: 0.0,
                previous_stage_m: 0.0
            }
        );
        let e = StageStorage::from_areas(&[(0.0, 1.0), (1.0, -2.0)], VolumeMethod::Frustum)
            .unwrap_err();
        assert_eq!(
            format!("{e}"),
            "row 1: area_m2 = -2: must be a finite number >= 0"
        );
        let e = StageStorage::from_volumes(&[(0.0, 0.0), (1.0, 5.0), (2.0, 4.0)]).unwrap_err();
        assert!(matches!(e, StorageError::VolumeDecreasing { row: 2, .. }));
        let e = StageStorage::from_volumes(&[(0.0, f32::NAN), (1.0, 5.0)]).unwrap_err();
        assert!(matches!(e, StorageError::BadValue { row: 0, .. }));
        let many = [(0.0, 1.0); 33];
        assert_eq!(
            StageStorage::from_areas(&many, VolumeMethod::Frustum),
            Err(StorageError::TooManyRows { rows: 33, max: 32 })
        );
        assert_eq!(
            StageStorage::from_volumes(&[(0.0, 0.0)]),
            Err(StorageError::TooFewRows { rows: 1, min: 2 })
        );
        assert!(matches!(
            StageStorage::from_areas(&[(0.0, 1.0), (1.0, 0.0)], VolumeMethod::Frustum),
            Err(StorageError::NoTopArea { row: 1, .. })
        ));
    }

    #[test]
    fn nan_propagates_and_flat_stretch_inverts_to_its_lowest_stage() {
        let s = StageStorage::from_volumes(&[(0.0, 0.0), (1.0, 10.0), (2.0, 10.0), (3.0, 20.0)])
            .unwrap();
        assert!(s.storage_m3(f32::NAN).is_nan());
        assert!(s.stage_m(f32::NAN).is_nan());
        assert!((s.stage_m(10.0) - 1.0).abs() < 1e-6);
        assert!((s.stage_m(15.0) - 2.5).abs() < 1e-6);
    }
}
