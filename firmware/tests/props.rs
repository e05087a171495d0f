//! Property tests of driver and reader invariants.

use core::convert::Infallible;

use embedded_hal::digital::{ErrorType, InputPin};
use holdback_firmware::drivers::rain_gauge::RainGauge;
use holdback_firmware::eventlog::dump::{DumpEntry, DumpReader, Geometry};
use proptest::prelude::*;

/// An input pin that plays back one level per read.
struct ScriptPin(std::vec::IntoIter<bool>);
impl ErrorType for ScriptPin {
    type Error = Infallible;
}
impl InputPin for ScriptPin {
    fn is_high(&mut self) -> Result<bool, Infallible> {
        Ok(self.0.next().unwrap_or(true))
    }
    fn is_low(&mut self) -> Result<bool, Infallible> {
        self.is_high().map(|h| !h)
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Alternating open/closed contact periods, each longer than the debounce time, with a
    /// burst of bounce (flips each shorter than the debounce time) at every change: exactly
    /// one tip per closed period, whatever the bounce.
    #[test]
    fn one_tip_per_closure_whatever_the_bounce(
        debounce_ms in 2u32..20,
        periods in proptest::collection::vec((0u32..60, proptest::collection::vec(1u32..20, 0..6)), 1..12),
    ) {
        let mut levels = vec![true; debounce_ms as usize + 5]; // open, pulled up
        let mut closures = 0;
        for (k, (extra, bounce)) in periods.iter().enumerate() {
            let closed = k % 2 == 0;
            for (j, b) in bounce.iter().enumerate() {
                let len = (b % debounce_ms).max(1) as usize;
                let lvl = if j % 2 == 0 { !closed } else { closed };
                levels.extend(std::iter::repeat_n(!lvl, len));
            }
            levels.extend(std::iter::repeat_n(!closed, (debounce_ms + 1 + extra) as usize));
            if closed {
                closures += 1;
            }
        }
        let n = levels.len();
        let mut g = RainGauge::new(ScriptPin(levels.into_iter()), true, debounce_ms);
        let mut tips = 0;
        for t in 0..n as u64 {
            if g.poll(t).unwrap().is_some() {
                tips += 1;
            }
        }
        prop_assert_eq!(tips, closures);
    }

    /// Arbitrary images never panic the dump reader; every region it reports is inside the
    /// image, and it ends.
    #[test]
    fn dump_reader_is_total(image in proptest::collection::vec(any::<u8>(), 256..=1024)) {
        let len = image.len() / 64 * 64;
        let g = Geometry::new(1, 4, 64).unwrap();
        let r = DumpReader::new(&image[..len], g).unwrap();
        for e in r.take(1000) {
            match e {
                DumpEntry::Record { offset, .. } => prop_assert!(offset < len),
                DumpEntry::Corrupt { offset, len: l, .. } => prop_assert!(offset + l <= len),
            }
        }
    }
}
