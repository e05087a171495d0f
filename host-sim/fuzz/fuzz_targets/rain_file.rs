//! Fuzz the rain-file reader in its interval and tip forms: any text must give a record or an
//! error naming what is wrong, never a panic; event splitting of whatever was read must not
//! panic either.
#![no_main]

use holdback_sim::rainfile::{DepthUnit, RainFormat, RainKind, Stamp, TimeFormat, parse, split_events};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((&sel, rest)) = data.split_first() else {
        return;
    };
    let Ok(text) = std::str::from_utf8(rest) else {
        return;
    };
    let fmt = RainFormat {
        kind: if sel & 1 == 0 { RainKind::Interval } else { RainKind::Tips },
        time_col: "1".into(),
        depth_col: "2".into(),
        time_format: match (sel >> 1) % 3 {
            0 => TimeFormat::Iso,
            1 => TimeFormat::S,
            _ => TimeFormat::Min,
        },
        unit: if sel & 8 == 0 { DepthUnit::Mm } else { DepthUnit::In },
        interval_s: 300,
        bucket_mm: 0.2,
        stamp: if sel & 16 == 0 { Stamp::End } else { Stamp::Start },
        sparse: sel & 32 != 0,
    };
    if let Ok(rec) = parse(text, &fmt) {
        let _ = split_events(&rec, 3600);
    }
});
