//! A rain gauge read through sliding windows: tipping-bucket pulses or interval totals.
//!
//! Every input becomes a *rain record*: a depth (mm) spread uniformly over a time span
//! `[start_s, end_s]` (a point when the two are equal). The depth in a window of length `W`
//! ending at `now_s` is the part of each record that falls in `(now_s − W, now_s]`; the mean
//! intensity is that depth / W, in mm/h. Records sit in a fixed ring buffer of `N`; records
//! too old to touch the longest window are dropped first, and when the buffer is still full
//! the oldest goes and any window reaching back over it is reported `saturated` (its depth is
//! then an underestimate). Nothing here fails or panics after [`RainGauge::new`].
//!
//! **Rule for a tip (documented choice).** A counted tip is spread uniformly over the time back
//! to the previous counted tip (or, for the first one, back to the first time the gauge saw),
//! capped at `spread_cap_s`. So a single tip after a dry spell reads as the rain of that whole
//! span, not as a burst: in any window its intensity is at most
//! `bucket_mm / min(time since previous tip, spread_cap_s)`, in mm/h after × 3600 s/h. Inside
//! a storm tips are seconds apart and the spread is negligible.
//!
//! **Chatter.** The counted depth may not outrun `max_intensity_mm_h`: a credit of depth
//! accrues at that rate up to two buckets, and each counted tip spends one bucket. A tip with
//! no credit is *chatter*: counted in [`GaugeStatus::chatter_tips`], not as rain. Interval
//! totals above the plausible rate are clipped to it and flagged the same way.
//!
//! **Clog.** Each [`RainGauge::step`] says whether the stage is rising. When it has risen
//! without a break for `clog_after_s` and no rain was counted in that time, the gauge is
//! flagged clogged; the flag holds until rain is counted again.
//!
//! **Events.** An event starts with the first counted rain and ends once no rain has been
//! counted for `inter_event_dry_s`; it carries its depth, start, last rain and the peak
//! intensity of every window (evaluated at each record's end).
//!
//! Units: time integer seconds (`u32`), depth mm, intensity mm/h.

use super::RainError;
use crate::validate;
use heapless::Deque;

/// Most sliding windows one gauge evaluates.
pub const MAX_WINDOWS: usize = 8;

/// Settings of a gauge, validated by [`RainGauge::new`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GaugeSettings {
    /// Depth of one bucket tip, mm (> 0).
    pub bucket_mm: f32,
    /// Longest span one tip is spread over, s (> 0).
    pub spread_cap_s: u32,
    /// Highest plausible rain intensity, mm/h (> 0); faster tips are chatter.
    pub max_intensity_mm_h: f32,
    /// Rising stage without rain for this long flags a clog, s (> 0).
    pub clog_after_s: u32,
    /// Dry time that ends a rain event, s (> 0).
    pub inter_event_dry_s: u32,
}

impl Default for GaugeSettings {
    /// 0.2 mm bucket, 1 h spread cap, 500 mm/h plausible maximum, 30 min clog time, 6 h
    /// inter-event dry time (common practice, no source).
    fn default() -> Self {
        GaugeSettings {
            bucket_mm: 0.2,
            spread_cap_s: 3600,
            max_intensity_mm_h: 500.0,
            clog_after_s: 1800,
            inter_event_dry_s: 6 * 3600,
        }
    }
}

/// Depth and mean intensity over one window ending at the query time.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WindowReading {
    /// Window length, s.
    pub window_s: u32,
    /// Rain depth in the window, mm.
    pub depth_mm: f32,
    /// Mean intensity over the window, mm/h.
    pub intensity_mm_h: f32,
    /// The buffer lost a record that reached into this window: the depth is an underestimate.
    pub saturated: bool,
}

/// Readings of all configured windows, in the order they were configured.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Readings {
    items: [WindowReading; MAX_WINDOWS],
    len: usize,
}

impl Readings {
    /// The readings as a slice.
    pub fn as_slice(&self) -> &[WindowReading] {
        self.items.get(..self.len).unwrap_or(&[])
    }
}

/// The peak of one window during an event.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WindowPeak {
    /// Window length, s.
    pub window_s: u32,
    /// Highest mean intensity seen, mm/h.
    pub intensity_mm_h: f32,
    /// When it was seen (window end), s.
    pub at_s: u32,
    /// Some reading of this window in the event was saturated.
    pub saturated: bool,
}

/// One rain event.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RainEvent {
    /// Start of the first counted rain, s (a tip's time or an interval's start).
    pub start_s: u32,
    /// End of the last counted rain, s.
    pub last_rain_s: u32,
    /// Counted depth, mm.
    pub depth_mm: f32,
    peaks: [WindowPeak; MAX_WINDOWS],
    len: usize,
}

impl RainEvent {
    /// Duration from the first to the last counted rain, s.
    pub fn duration_s(&self) -> u32 {
        self.last_rain_s.saturating_sub(self.start_s)
    }
    /// Peak intensity of every configured window, in configured order.
    pub fn peaks(&self) -> &[WindowPeak] {
        self.peaks.get(..self.len).unwrap_or(&[])
    }
}

/// Health and state flags after a step.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GaugeStatus {
    /// Stage rose for `clog_after_s` with no rain counted; holds until rain is counted.
    pub clogged: bool,
    /// Chatter (tips or totals above the plausible rate) within the longest window.
    pub chatter: bool,
    /// The longest window is saturated (buffer overflow lost a record inside it).
    pub saturated: bool,
    /// A rain event is open.
    pub raining: bool,
    /// Tips not counted as rain because they came faster than plausible, since start.
    pub chatter_tips: u32,
    /// Records lost to buffer overflow while still inside the longest window, since start.
    pub lost_records: u32,
}

/// What became of one tip.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum TipOutcome {
    /// Counted as one bucket of rain.
    Counted,
    /// Faster than plausible: not counted as rain.
    Chatter,
    /// Earlier than a time the gauge already saw: ignored.
    OutOfOrder,
}

/// What became of one interval total.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum IntervalOutcome {
    /// Counted in full.
    Counted,
    /// Zero depth: time advanced, nothing stored.
    Dry,
    /// Above the plausible rate: counted up to it, flagged as chatter.
    Clipped,
    /// Not a finite depth ≥ 0, a zero interval, or ending before a time already seen: ignored.
    Rejected,
}

#[derive(Debug, Clone, Copy, PartialEq)]
struct Record {
    start_s: u32,
    end_s: u32,
    depth_mm: f32,
}

impl Record {
    /// Depth of this record inside `(from_s, to_s]`.
    fn depth_in(&self, from_s: u32, to_s: u32) -> f32 {
        if self.end_s <= self.start_s {
            if self.end_s > from_s && self.end_s <= to_s {
                self.depth_mm
            } else {
                0.0
            }
        } else {
            let lo = self.start_s.max(from_s);
            let hi = self.end_s.min(to_s);
            if hi <= lo {
                0.0
            } else {
                let span = self.end_s.saturating_sub(self.start_s) as f32;
                self.depth_mm * (hi.saturating_sub(lo) as f32 / span)
            }
        }
    }
}

/// A rain gauge with a ring buffer of `N` rain records (see the module doc for the rules);
/// `N = 0` does not compile (heapless checks it at compile time).
#[derive(Debug, Clone)]
pub struct RainGauge<const N: usize> {
    settings: GaugeSettings,
    windows_s: [u32; MAX_WINDOWS],
    n_windows: usize,
    longest_s: u32,
    records: Deque<Record, N>,
    /// First time seen (spread origin of the first tip).
    origin_s: Option<u32>,
    /// Latest time seen by any call.
    latest_s: u32,
    last_tip_s: Option<u32>,
    last_rain_s: Option<u32>,
    credit_mm: f32,
    credit_at_s: u32,
    last_chatter_s: Option<u32>,
    chatter_tips: u32,
    lost_end_s: Option<u32>,
    lost_records: u32,
    rising_since_s: Option<u32>,
    clogged: bool,
    tips_counted: u32,
    interval_depth_mm: f32,
    event: Option<RainEvent>,
    completed: Option<RainEvent>,
    completed_count: u32,
}

impl<const N: usize> RainGauge<N> {
    /// A gauge evaluating the windows `windows_s` (1..=[`MAX_WINDOWS`], each 1 s..=7 days, any
    /// order, e.g. 300, 600, 900, 1800, 3600 and the catchment's time of concentration).
    pub fn new(settings: &GaugeSettings, windows_s: &[u32]) -> Result<Self, RainError> {
        validate::positive("bucket_mm", settings.bucket_mm)?;
        validate::positive("max_intensity_mm_h", settings.max_intensity_mm_h)?;
        for (field, v) in [
            ("spread_cap_s", settings.spread_cap_s),
            ("clog_after_s", settings.clog_after_s),
            ("inter_event_dry_s", settings.inter_event_dry_s),
        ] {
            if v == 0 {
                return Err(validate::Invalid {
                    field,
                    value: 0.0,
                    rule: "must be > 0 s",
                }
                .into());
            }
        }
        if windows_s.is_empty() {
            return Err(RainError::TooFew {
                what: "windows_s",
                min: 1,
            });
        }
        if windows_s.len() > MAX_WINDOWS {
            return Err(RainError::TooMany {
                what: "windows_s",
                max: MAX_WINDOWS,
            });
        }
        if N == 0 {
            return Err(RainError::TooFew {
                what: "record buffer capacity",
                min: 1,
            });
        }
        let mut arr = [0u32; MAX_WINDOWS];
        for (slot, &w) in arr.iter_mut().zip(windows_s) {
            if w == 0 || w > 7 * 86_400 {
                return Err(validate::Invalid {
                    field: "window_s",
                    value: w as f32,
                    rule: "must be in 1..=604800 s",
                }
                .into());
            }
            *slot = w;
        }
        let longest_s = windows_s.iter().copied().max().unwrap_or(1);
        Ok(RainGauge {
            settings: *settings,
            windows_s: arr,
            n_windows: windows_s.len(),
            longest_s,
            records: Deque::new(),
            origin_s: None,
            latest_s: 0,
            last_tip_s: None,
            last_rain_s: None,
            credit_mm: 2.0 * settings.bucket_mm,
            credit_at_s: 0,
            last_chatter_s: None,
            chatter_tips: 0,
            lost_end_s: None,
            lost_records: 0,
            rising_since_s: None,
            clogged: false,
            tips_counted: 0,
            interval_depth_mm: 0.0,
            event: None,
            completed: None,
            completed_count: 0,
        })
    }

    /// The settings the gauge was built with.
    pub fn settings(&self) -> &GaugeSettings {
        &self.settings
    }

    /// The configured windows, s.
    pub fn windows_s(&self) -> &[u32] {
        self.windows_s.get(..self.n_windows).unwrap_or(&[])
    }

    /// Sees a time; returns false when it is earlier than one already seen.
    fn see(&mut self, t_s: u32) -> bool {
        match self.origin_s {
            None => {
                self.origin_s = Some(t_s);
                self.latest_s = t_s;
                self.credit_at_s = t_s;
                true
            }
            Some(_) if t_s < self.latest_s => false,
            Some(_) => {
                self.latest_s = t_s;
                true
            }
        }
    }

    fn max_rate_mm_s(&self) -> f32 {
        self.settings.max_intensity_mm_h / 3600.0
    }

    /// One tip of the bucket at `t_s`.
    pub fn record_tip(&mut self, t_s: u32) -> TipOutcome {
        if !self.see(t_s) {
            return TipOutcome::OutOfOrder;
        }
        self.close_event_if_dry(t_s);
        let dt = t_s.saturating_sub(self.credit_at_s) as f32;
        let cap = 2.0 * self.settings.bucket_mm;
        self.credit_mm = (self.credit_mm + dt * self.max_rate_mm_s()).min(cap);
        self.credit_at_s = t_s;
        // A small tolerance so that tips exactly at the plausible rate still count.
        if self.credit_mm + 1e-4 * self.settings.bucket_mm < self.settings.bucket_mm {
            self.chatter_tips = self.chatter_tips.saturating_add(1);
            self.last_chatter_s = Some(t_s);
            return TipOutcome::Chatter;
        }
        self.credit_mm = (self.credit_mm - self.settings.bucket_mm).max(0.0);
        let prev = self.last_tip_s.or(self.origin_s).unwrap_or(t_s);
        let start_s = prev.max(t_s.saturating_sub(self.settings.spread_cap_s));
        self.last_tip_s = Some(t_s);
        self.tips_counted = self.tips_counted.saturating_add(1);
        self.add_rain(
            Record {
                start_s,
                end_s: t_s,
                depth_mm: self.settings.bucket_mm,
            },
            t_s,
        );
        TipOutcome::Counted
    }

    /// `count` tips stamped with the same second `t_s` (a pulse counter read once a
    /// second); returns how many were counted as rain.
    pub fn record_tips(&mut self, t_s: u32, count: u32) -> u32 {
        let mut counted = 0u32;
        // At most two buckets of credit exist, so beyond three tips all are chatter.
        for _ in 0..count.min(3) {
            if self.record_tip(t_s) == TipOutcome::Counted {
                counted = counted.saturating_add(1);
            }
        }
        if count > 3 && t_s >= self.latest_s {
            self.chatter_tips = self.chatter_tips.saturating_add(count.saturating_sub(3));
            self.last_chatter_s = Some(t_s);
        }
        counted
    }

    /// `count` tips counted over the `interval_s` seconds ending at `end_s` (a pulse counter
    /// read once per control step), spread evenly over the interval (never before the last
    /// time the gauge saw), so that the plausible-rate check judges their mean rate over the
    /// interval and not a same-second burst. Tips beyond what the plausible rate allows over
    /// the interval (plus the two-bucket credit) are chatter. Returns how many were counted.
    pub fn record_tips_over(&mut self, end_s: u32, interval_s: u32, count: u32) -> u32 {
        let from = match self.origin_s {
            Some(_) => end_s.saturating_sub(interval_s).max(self.latest_s),
            None => end_s.saturating_sub(interval_s),
        };
        let span = end_s.saturating_sub(from);
        if span <= 1 || count <= 1 || end_s < self.latest_s {
            return self.record_tips(end_s, count);
        }
        let bucket = self.settings.bucket_mm;
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        let plausible = (self.max_rate_mm_s() * span as f32 / bucket) as u32;
        let n = count.min(plausible.saturating_add(3));
        let mut counted = 0u32;
        for k in 1..=n {
            let at = u64::from(span)
                .saturating_mul(u64::from(k))
                .checked_div(u64::from(n))
                .unwrap_or(0);
            let t = from.saturating_add(u32::try_from(at).unwrap_or(span));
            if self.record_tip(t) == TipOutcome::Counted {
                counted = counted.saturating_add(1);
            }
        }
        if count > n {
            self.chatter_tips = self.chatter_tips.saturating_add(count.saturating_sub(n));
            self.last_chatter_s = Some(end_s);
        }
        counted
    }

    /// A rain total `depth_mm` over the interval of `interval_s` ending at `end_s` (e.g. a
    /// 5-min total), spread uniformly over the interval.
    pub fn record_interval(
        &mut self,
        end_s: u32,
        interval_s: u32,
        depth_mm: f32,
    ) -> IntervalOutcome {
        if interval_s == 0 || !depth_mm.is_finite() || depth_mm < 0.0 {
            return IntervalOutcome::Rejected;
        }
        if !self.see(end_s) {
            return IntervalOutcome::Rejected;
        }
        self.close_event_if_dry(end_s);
        if depth_mm == 0.0 {
            return IntervalOutcome::Dry;
        }
        let plausible = self.max_rate_mm_s() * interval_s as f32;
        let (depth, outcome) = if depth_mm > plausible {
            self.last_chatter_s = Some(end_s);
            (plausible, IntervalOutcome::Clipped)
        } else {
            (depth_mm, IntervalOutcome::Counted)
        };
        self.interval_depth_mm += depth;
        let start_s = end_s.saturating_sub(interval_s);
        self.add_rain(
            Record {
                start_s,
                end_s,
                depth_mm: depth,
            },
            start_s,
        );
        outcome
    }

    fn add_rain(&mut self, rec: Record, rain_start_s: u32) {
        // Drop records that no longer reach into the longest window.
        let horizon = self.latest_s.saturating_sub(self.longest_s);
        while let Some(front) = self.records.front() {
            if front.end_s <= horizon {
                self.records.pop_front();
            } else {
                break;
            }
        }
        if self.records.is_full()
            && let Some(old) = self.records.pop_front()
        {
            self.lost_end_s = Some(self.lost_end_s.map_or(old.end_s, |e| e.max(old.end_s)));
            self.lost_records = self.lost_records.saturating_add(1);
        }
        // Cannot fail: a slot was freed above when the buffer was full.
        let _ = self.records.push_back(rec);
        self.last_rain_s = Some(rec.end_s);
        self.clogged = false;
        let (windows_s, n_windows) = (self.windows_s, self.n_windows);
        let ev = self.event.get_or_insert_with(|| {
            let mut e = RainEvent {
                start_s: rain_start_s,
                last_rain_s: rec.end_s,
                ..RainEvent::default()
            };
            for (p, &w) in e.peaks.iter_mut().zip(windows_s.iter()) {
                p.window_s = w;
            }
            e.len = n_windows;
            e
        });
        ev.depth_mm += rec.depth_mm;
        ev.last_rain_s = ev.last_rain_s.max(rec.end_s);
        let readings = self.readings(rec.end_s);
        if let Some(ev) = self.event.as_mut() {
            for (p, r) in ev.peaks.iter_mut().zip(readings.as_slice()) {
                if r.intensity_mm_h > p.intensity_mm_h {
                    p.intensity_mm_h = r.intensity_mm_h;
                    p.at_s = rec.end_s;
                }
                p.saturated |= r.saturated;
            }
        }
    }

    fn close_event_if_dry(&mut self, now_s: u32) {
        if let Some(ev) = self.event
            && now_s.saturating_sub(ev.last_rain_s) >= self.settings.inter_event_dry_s
        {
            self.completed = Some(ev);
            self.completed_count = self.completed_count.saturating_add(1);
            self.event = None;
        }
    }

    /// Advances to `now_s`, telling whether the pond's stage is rising; updates the clog flag
    /// and closes an event after the inter-event dry time. A time earlier than one already
    /// seen changes nothing but the stage trend.
    pub fn step(&mut self, now_s: u32, stage_rising: bool) -> GaugeStatus {
        let now_s = if self.see(now_s) {
            now_s
        } else {
            self.latest_s
        };
        self.close_event_if_dry(now_s);
        if stage_rising {
            let since = *self.rising_since_s.get_or_insert(now_s);
            let quiet_since = self.last_rain_s.map_or(since, |r| r.max(since));
            if now_s.saturating_sub(quiet_since) >= self.settings.clog_after_s {
                self.clogged = true;
            }
        } else {
            self.rising_since_s = None;
        }
        self.status(now_s)
    }

    /// Flags as they stand at `now_s`.
    pub fn status(&self, now_s: u32) -> GaugeStatus {
        GaugeStatus {
            clogged: self.clogged,
            chatter: self
                .last_chatter_s
                .is_some_and(|c| now_s.saturating_sub(c) < self.longest_s),
            saturated: self.is_saturated(now_s, self.longest_s),
            raining: self.event.is_some(),
            chatter_tips: self.chatter_tips,
            lost_records: self.lost_records,
        }
    }

    fn is_saturated(&self, now_s: u32, window_s: u32) -> bool {
        self.lost_end_s
            .is_some_and(|e| e > now_s.saturating_sub(window_s))
    }

    /// Depth and mean intensity over any window of `window_s` ending at `now_s` (a zero
    /// window reads zero).
    pub fn reading(&self, now_s: u32, window_s: u32) -> WindowReading {
        let from_s = now_s.saturating_sub(window_s);
        let depth_mm: f32 = self.records.iter().map(|r| r.depth_in(from_s, now_s)).sum();
        let intensity_mm_h = if window_s == 0 {
            0.0
        } else {
            depth_mm * 3600.0 / window_s as f32
        };
        WindowReading {
            window_s,
            depth_mm,
            intensity_mm_h,
            saturated: self.is_saturated(now_s, window_s),
        }
    }

    /// Readings of all configured windows at `now_s`.
    pub fn readings(&self, now_s: u32) -> Readings {
        let mut out = Readings {
            len: self.n_windows,
            ..Readings::default()
        };
        for (slot, &w) in out.items.iter_mut().zip(self.windows_s()) {
            *slot = self.reading(now_s, w);
        }
        out
    }

    /// All rain counted since start, mm (tips × bucket plus interval totals).
    pub fn total_depth_mm(&self) -> f32 {
        self.tips_counted as f32 * self.settings.bucket_mm + self.interval_depth_mm
    }

    /// Tips counted as rain since start.
    pub fn tips_counted(&self) -> u32 {
        self.tips_counted
    }

    /// The open event, if rain is falling or fell within the inter-event dry time.
    pub fn current_event(&self) -> Option<&RainEvent> {
        self.event.as_ref()
    }

    /// The most recently completed event.
    pub fn last_completed_event(&self) -> Option<&RainEvent> {
        self.completed.as_ref()
    }

    /// How many events have completed since start.
    pub fn completed_events(&self) -> u32 {
        self.completed_count
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A spread record contributes its overlapping fraction; a point counts in `(from, to]`.
    #[test]
    fn record_depth_in_window_is_the_overlapping_fraction() {
        let r = Record {
            start_s: 100,
            end_s: 200,
            depth_mm: 1.0,
        };
        assert_eq!(r.depth_in(150, 300), 0.5);
        assert_eq!(r.depth_in(0, 100), 0.0);
        assert_eq!(r.depth_in(0, 1000), 1.0);
        let p = Record {
            start_s: 100,
            end_s: 100,
            depth_mm: 0.2,
        };
        assert_eq!(p.depth_in(99, 100), 0.2);
        assert_eq!(p.depth_in(100, 200), 0.0);
    }

    /// Tips read as one count per 10-s control step: at 300 mm/h (4–5 tips of 0.2 mm per
    /// read, under the 500 mm/h plausible rate) every tip counts and none is chatter, which a
    /// same-second burst of the same count would not allow (two buckets of credit); at
    /// 7 200 mm/h (100 tips in 10 s) what exceeds the plausible rate is chatter.
    #[test]
    fn batched_tips_are_judged_at_their_mean_rate() {
        let s = GaugeSettings::default();
        let mut g = RainGauge::<256>::new(&s, &[300]).unwrap();
        let mut counted = 0;
        let mut sent = 0;
        let mut carry = 0.0_f32;
        for k in 1..=60u32 {
            carry += 300.0 / 3600.0 * 10.0;
            let n = (carry / 0.2 + 1e-4) as u32;
            carry -= n as f32 * 0.2;
            sent += n;
            counted += g.record_tips_over(k * 10, 10, n);
        }
        assert_eq!(counted, sent);
        assert!(!g.status(600).chatter);
        let r = g.reading(600, 300);
        assert!((r.intensity_mm_h - 300.0).abs() < 10.0, "{r:?}");
        // The same 5 tips stamped in one second: only what two buckets of credit allow.
        let mut h = RainGauge::<64>::new(&s, &[300]).unwrap();
        h.record_tips(10, 1);
        assert!(h.record_tips(20, 5) < 5);
        // A stuck contact: 100 tips in 10 s.
        let mut c = RainGauge::<64>::new(&s, &[300]).unwrap();
        c.record_tips_over(10, 10, 1);
        let got = c.record_tips_over(20, 10, 100);
        // Counted up to the plausible rate (500 mm/h · 10 s / 0.2 mm ≈ 7 tips, plus the
        // two-bucket credit), the rest is chatter.
        assert!(got <= 9, "{got}");
        assert!(c.status(20).chatter);
    }

    /// Interval totals read back exactly over windows aligned with the intervals.
    #[test]
    fn aligned_interval_totals_read_back_exactly() {
        let mut g = RainGauge::<16>::new(&GaugeSettings::default(), &[300, 900]).unwrap();
        for (k, mm) in [1.0_f32, 2.0, 3.0].into_iter().enumerate() {
            let end = 300 * (k as u32 + 1);
            assert_eq!(g.record_interval(end, 300, mm), IntervalOutcome::Counted);
        }
        let r = g.readings(900);
        assert_eq!(r.as_slice()[0].depth_mm, 3.0);
        assert_eq!(r.as_slice()[1].depth_mm, 6.0);
        assert_eq!(r.as_slice()[1].intensity_mm_h, 24.0);
    }
}
