//! Invented demo ponds for the controller tests. **Demo data**: every name and number here is
//! made up for the scenario, not taken from any real site; the tests check the controller
//! against bounds computed on these ponds, never against the numbers themselves.

use holdback_core::config::{
    ControlSettings, IdfModel, Levels, Permit, PondConfig, PondParts, SafeSettings, SensorLimits,
};
use holdback_core::forecast::{FutureRain, Limits, Outlook};
use holdback_core::hydraulics::Riser;
use holdback_core::hydraulics::{
    CircularOrifice, FixedStructure, Outlet, RectangularWeir, SluiceGate, Spillway,
};
use holdback_core::rain::{GaugeSettings, IdfCurves, IdfFormula};
use holdback_core::runoff::{
    AreaHa, Catchment, RunoffCoefficient, SubCatchment, TimeAreaInflow, TimeAreaResponse,
    TimeOfConcentration,
};
use holdback_core::storage::{BasinGeometry, StageStorage, VolumeMethod};

/// Runoff (time–area) step of the demo ponds, s.
pub const RUNOFF_DT_S: u32 = 60;

/// Invented Talbot curves `i = a/(t + b)` (mm/h, t in min) for 2, 10 and 100 years.
pub fn demo_idf() -> IdfModel {
    IdfModel::Curves(
        IdfCurves::new(
            &[
                (2.0, IdfFormula::Talbot { a: 1500.0, b: 15.0 }),
                (10.0, IdfFormula::Talbot { a: 2500.0, b: 15.0 }),
                (100.0, IdfFormula::Talbot { a: 4000.0, b: 15.0 }),
            ],
            5.0,
            1440.0,
        )
        .expect("demo IDF"),
    )
}

fn sensors(floor_m: f32, crest_m: f32) -> SensorLimits {
    SensorLimits {
        stage_min_m: floor_m - 0.5,
        stage_max_m: crest_m + 1.0,
        max_stage_rate_m_s: 0.005,
        spike_m: 0.1,
        noise_m: SensorLimits::DEFAULT_NOISE_M,
        stuck_s: 900,
        missing_steps: 6,
        position_tolerance_m: 0.01,
        move_timeout_s: 60,
        gauge: GaugeSettings::default(),
    }
}

fn sub(c: f32, ha: f32, tc_s: u32, lag_s: u32) -> SubCatchment {
    SubCatchment::new(
        RunoffCoefficient::new(c).unwrap(),
        AreaHa::new(ha).unwrap(),
        TimeOfConcentration::from_s(tc_s).unwrap(),
        lag_s,
    )
    .unwrap()
}

/// "Quillmere Basin" (invented): a 50 × 30 m basin with 3:1 sides, a low-flow orifice at the
/// normal level, an emergency spillway, an 8 ha catchment, permit 0.12 m³/s.
pub fn quillmere() -> PondParts {
    let floor = 100.0;
    let storage = StageStorage::from_basin(BasinGeometry {
        floor_m: floor,
        length_m: 50.0,
        width_m: 30.0,
        side_slope_h_per_v: 3.0,
        depth_m: 2.6,
    })
    .unwrap();
    let fixed: [FixedStructure; 2] = [
        CircularOrifice::new(100.2, 0.05, 0.6).unwrap().into(),
        Spillway::new(102.2, 4.0, 2.0, 0.9).unwrap().into(),
    ];
    let gate = SluiceGate::new(100.0, 0.4, 0.4, 0.61, 0.98).unwrap();
    let outlet = Outlet::new(&fixed, Some(gate), None).unwrap();
    let catchment = Catchment::new(&[sub(0.55, 8.0, 25 * 60, 0)]).unwrap();
    PondParts {
        storage,
        outlet,
        levels: Levels {
            normal_m: 100.2,
            crest_m: 102.2,
            freeboard_m: 0.3,
        },
        permit: Permit {
            release_m3s: 0.12,
            margin: 0.05,
        },
        catchment: TimeAreaResponse::from_catchment(&catchment, RUNOFF_DT_S).unwrap(),
        idf: demo_idf(),
        control: ControlSettings {
            drawdown_target_s: 24 * 3600,
            ..ControlSettings::default()
        },
        sensors: sensors(floor, 102.2),
        safe: SafeSettings {
            safe_opening_m: 0.05,
        },
    }
}

/// "Ashby Fen Pond" (invented): a surveyed pond, low-flow orifice, an old overflow weir,
/// spillway, two sub-catchments (25 ha), permit 0.35 m³/s.
pub fn ashby_fen() -> PondParts {
    let storage = StageStorage::from_areas(
        &[
            (50.0, 800.0),
            (50.5, 1500.0),
            (51.0, 2200.0),
            (51.5, 2900.0),
            (52.0, 3500.0),
            (52.6, 4100.0),
        ],
        VolumeMethod::Frustum,
    )
    .unwrap();
    let fixed: [FixedStructure; 3] = [
        CircularOrifice::new(50.3, 0.08, 0.6).unwrap().into(),
        RectangularWeir::new(51.6, 0.3, 0.62, 2).unwrap().into(),
        Spillway::new(52.1, 6.0, 2.0, 0.9).unwrap().into(),
    ];
    let gate = SluiceGate::new(50.0, 0.6, 0.6, 0.61, 0.98).unwrap();
    let outlet = Outlet::new(&fixed, Some(gate), None).unwrap();
    let catchment =
        Catchment::new(&[sub(0.45, 15.0, 30 * 60, 0), sub(0.7, 10.0, 15 * 60, 600)]).unwrap();
    PondParts {
        storage,
        outlet,
        levels: Levels {
            normal_m: 50.3,
            crest_m: 52.1,
            freeboard_m: 0.25,
        },
        permit: Permit {
            release_m3s: 0.35,
            margin: 0.05,
        },
        catchment: TimeAreaResponse::from_catchment(&catchment, RUNOFF_DT_S).unwrap(),
        idf: demo_idf(),
        control: ControlSettings {
            drawdown_target_s: 24 * 3600,
            ..ControlSettings::default()
        },
        sensors: sensors(50.0, 52.1),
        safe: SafeSettings {
            safe_opening_m: 0.1,
        },
    }
}

/// Both demo ponds, validated, with their names.
pub fn all() -> [(&'static str, PondConfig); 2] {
    [
        (
            "quillmere",
            PondConfig::new(quillmere()).expect("quillmere"),
        ),
        (
            "ashby_fen",
            PondConfig::new(ashby_fen()).expect("ashby_fen"),
        ),
    ]
}

/// The invented forecast scene of `benches/forecast.rs`, `tests/forecast_fast.rs` and the
/// board's forecast kernels (**demo data**): a side-sloped basin, an orifice, a riser, a
/// spillway and a gate with a fixed tailwater, 12 ha at C = 0.55 with a 30 min Tc at a
/// 60 s runoff step and 40 min of rain fallen, 900 m³ stored.
pub struct ForecastScene {
    /// The basin.
    pub pond: StageStorage,
    /// The composite outlet.
    pub outlet: Outlet,
    /// The catchment with its 40 min of rain.
    pub runoff: TimeAreaInflow,
    /// Permit 0.12 m³/s, stage limit 102.4 m, crest 102.9 m.
    pub limits: Limits,
    /// Stored at the start, m³.
    pub storage_m3: f32,
}

/// The rain the forecast scene assumes to come: 25 mm/h persisting for an hour.
pub const SCENE_FUTURE: FutureRain = FutureRain::Persist {
    intensity_mm_h: 25.0,
    for_s: 3600,
};

/// Builds the [`ForecastScene`].
pub fn forecast_scene() -> ForecastScene {
    let pond = StageStorage::from_basin(BasinGeometry {
        floor_m: 100.0,
        length_m: 60.0,
        width_m: 30.0,
        side_slope_h_per_v: 3.0,
        depth_m: 3.0,
    })
    .unwrap();
    let orifice = CircularOrifice::new(100.0, 0.15, 0.6).unwrap();
    let riser = Riser::circular(101.8, 1.2, 0.6, 0.6).unwrap();
    let spillway = Spillway::new(102.6, 8.0, 3.0, 0.9).unwrap();
    let gate = SluiceGate::new(100.0, 0.6, 0.6, 0.61, 0.98).unwrap();
    let outlet = Outlet::new(
        &[orifice.into(), riser.into(), spillway.into()],
        Some(gate),
        Some(100.1),
    )
    .unwrap();
    let sub = SubCatchment::new(
        RunoffCoefficient::new(0.55).unwrap(),
        AreaHa::new(12.0).unwrap(),
        TimeOfConcentration::from_s(1800).unwrap(),
        120,
    )
    .unwrap();
    let resp = TimeAreaResponse::from_catchment(&Catchment::new(&[sub]).unwrap(), 60).unwrap();
    let mut runoff = TimeAreaInflow::new(resp);
    for k in 0..40 {
        runoff.push_step(0.2 + 0.01 * k as f32);
    }
    ForecastScene {
        pond,
        outlet,
        runoff,
        limits: Limits::new(0.12, 102.4, 102.9).unwrap(),
        storage_m3: 900.0,
    }
}

impl ForecastScene {
    /// The scene's outlook: [`SCENE_FUTURE`] over a 3 h horizon at 180 s.
    pub fn outlook(&self) -> Outlook {
        Outlook::from_time_area(&self.runoff, &SCENE_FUTURE, None, 180, 3 * 3600).unwrap()
    }
}
