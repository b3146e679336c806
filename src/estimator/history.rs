//! A fixed-memory summary of every accepted reading.
//!
//! At most `N` slots of (mean time, first time, last time, mean value, count), stored as
//! separate arrays so nothing is lost to padding. When a reading arrives and
//! every slot is taken, one adjacent pair is merged: a pair on the plateau
//! (both means within 10 % of the highest, agreeing within noise) if there is
//! one, as merging flat readings loses nothing; otherwise the pair tightest in
//! time, so the climb keeps an even resolution. A long plateau therefore
//! collects in one slot instead of washing out the growth phase. The fit
//! models each slot as the average of the curve over its time span (see
//! `fit::Curve::slot`), exact for evenly spaced readings however wide the
//! slot. Each slot's mean has its noise variance divided by its count.

use crate::Real;

/// The history buffer. Times are hours since the estimator's origin.
#[derive(Clone, Debug)]
pub(crate) struct History<T, const N: usize> {
    mean_h: [T; N],
    first_h: [T; N],
    last_h: [T; N],
    value: [T; N],
    count: [u16; N],
    len: u8,
}

impl<T: Real, const N: usize> History<T, N> {
    const CHECK: () = assert!(N >= 8 && N <= 255, "history length must be 8..=255");

    pub(crate) fn new() -> Self {
        let () = Self::CHECK;
        Self {
            mean_h: [T::ZERO; N],
            first_h: [T::ZERO; N],
            last_h: [T::ZERO; N],
            value: [T::ZERO; N],
            count: [0; N],
            len: 0,
        }
    }

    pub(crate) fn len(&self) -> usize {
        usize::from(self.len)
    }

    /// Slot `i`: (mean time of its readings in hours since origin, mean
    /// value, count).
    pub(crate) fn slot(&self, i: usize) -> (T, T, u16) {
        (self.mean_h[i], self.value[i], self.count[i])
    }

    /// Time span of slot `i`: (first, last reading), hours since origin.
    pub(crate) fn span(&self, i: usize) -> (T, T) {
        (self.first_h[i], self.last_h[i])
    }

    #[cfg(test)]
    /// Total readings represented (counts saturate at `u16::MAX` per slot).
    pub(crate) fn total(&self) -> u32 {
        self.count[..self.len()].iter().map(|&c| u32::from(c)).sum()
    }

    /// Adds one reading; `noise_sd(y)` is the noise model, used to decide
    /// merges. A reading at the newest slot's time is averaged into it (a
    /// duplicate timestamp loses nothing).
    pub(crate) fn push(&mut self, time_h: T, value: T, noise_sd: impl Fn(T) -> T) {
        let len = self.len();
        if len > 0 {
            let last = len - 1;
            if !(time_h > self.last_h[last]) {
                self.absorb(last, time_h, value, 1);
                return;
            }
        }
        if len == N {
            self.merge_cheapest_pair(noise_sd);
        }
        let len = self.len();
        self.mean_h[len] = time_h;
        self.first_h[len] = time_h;
        self.last_h[len] = time_h;
        self.value[len] = value;
        self.count[len] = 1;
        // len < N <= 255 here, so the cast cannot truncate.
        self.len = u8::try_from(len + 1).unwrap_or(u8::MAX);
    }

    /// Adds `count` readings of mean time `time_h` and mean `value` to slot
    /// `i` (count-weighted).
    fn absorb(&mut self, i: usize, time_h: T, value: T, count: u16) {
        let c0 = T::from_u32(u32::from(self.count[i]));
        let c1 = T::from_u32(u32::from(count));
        self.mean_h[i] = (self.mean_h[i] * c0 + time_h * c1) / (c0 + c1);
        self.value[i] = (self.value[i] * c0 + value * c1) / (c0 + c1);
        self.count[i] = self.count[i].saturating_add(count);
    }

    /// Merges one adjacent pair (see the module docs): first any pair on the
    /// plateau — both slot means within 10 % of the highest and agreeing
    /// within 2 noise sds of their difference — as that loses nothing;
    /// otherwise the pair tightest in time (smallest count-weighted second
    /// moment of the union's span). Near-ties (within 0.01 %) go to the
    /// older pair, so rounding cannot make f32 and f64 summarise the same
    /// run differently.
    fn merge_cheapest_pair(&mut self, noise_sd: impl Fn(T) -> T) {
        let best = self
            .oldest_plateau_pair(&noise_sd)
            .unwrap_or_else(|| self.tightest_pair());
        self.merge_pair(best);
    }

    /// The oldest adjacent pair on the plateau, if any (the first such pair
    /// wins, so the scan stops there). Only once the signal stands well out
    /// of the noise: a lag phase near zero is not a plateau.
    fn oldest_plateau_pair(&self, noise_sd: &impl Fn(T) -> T) -> Option<usize> {
        let len = self.len();
        let top = self.value[..len].iter().fold(T::ZERO, |m, &v| m.max(v));
        if !(top > T::from_f64(20.0) * noise_sd(T::ZERO)) {
            return None;
        }
        let floor = T::from_f64(0.98) * top;
        (0..len - 1).find(|&i| {
            let (y0, y1) = (self.value[i], self.value[i + 1]);
            if !(y0.min(y1) >= floor) {
                return false;
            }
            let c0 = T::from_u32(u32::from(self.count[i]));
            let c1 = T::from_u32(u32::from(self.count[i + 1]));
            let sd = noise_sd(y0.max(y1));
            let dy = y1 - y0;
            c0 * c1 / (c0 + c1) * dy * dy <= T::from_f64(4.0) * sd * sd
        })
    }

    /// The adjacent pair tightest in time: the smallest second moment in time
    /// of the union, each slot taken as c evenly spaced readings over its
    /// span (variance w²(c+1)/(12(c−1))) plus the parallel-axis term between
    /// their mean times. Near-ties (within 0.01 %) go to the older pair, so
    /// rounding cannot make f32 and f64 summarise the same run differently.
    fn tightest_pair(&self) -> usize {
        let spread = |w: T, c: T| {
            if c > T::ONE {
                w * w * (c + T::ONE) / (T::from_f64(12.0) * (c - T::ONE))
            } else {
                T::ZERO
            }
        };
        let mut best = 0;
        let mut best_cost = T::INFINITY;
        for i in 0..self.len() - 1 {
            let c0 = T::from_u32(u32::from(self.count[i]));
            let c1 = T::from_u32(u32::from(self.count[i + 1]));
            let gap = self.mean_h[i + 1] - self.mean_h[i];
            let cost = c0 * spread(self.last_h[i] - self.first_h[i], c0)
                + c1 * spread(self.last_h[i + 1] - self.first_h[i + 1], c1)
                + c0 * c1 / (c0 + c1) * gap * gap;
            if cost < best_cost * T::from_f64(0.9999) {
                best_cost = cost;
                best = i;
            }
        }
        best
    }

    /// Merges slot `best + 1` into slot `best` and closes the gap.
    fn merge_pair(&mut self, best: usize) {
        let len = self.len();
        let (mean, value, count, last) = (
            self.mean_h[best + 1],
            self.value[best + 1],
            self.count[best + 1],
            self.last_h[best + 1],
        );
        self.absorb(best, mean, value, count);
        self.last_h[best] = last;
        for j in best + 1..len - 1 {
            self.mean_h[j] = self.mean_h[j + 1];
            self.first_h[j] = self.first_h[j + 1];
            self.last_h[j] = self.last_h[j + 1];
            self.value[j] = self.value[j + 1];
            self.count[j] = self.count[j + 1];
        }
        self.len -= 1;
    }
}

#[cfg(test)]
mod tests {
    use super::History;

    #[test]
    fn merging_keeps_count_and_weighted_means() {
        let mut h = History::<f64, 8>::new();
        let mut sum_v = 0.0;
        for i in 0..100 {
            let t = f64::from(i);
            // A plateau at 5 after a climb: the plateau absorbs the merges.
            let v = if i < 10 {
                0.5 * f64::from(i)
            } else {
                5.0 + 0.01 * f64::from(i % 2)
            };
            sum_v += v;
            h.push(t, v, |_| 0.1);
        }
        assert_eq!(h.len(), 8);
        assert_eq!(h.total(), 100);
        // Count-weighted means are preserved exactly by every merge.
        let mut wv = 0.0;
        for i in 0..h.len() {
            let (_, v, c) = h.slot(i);
            wv += v * f64::from(c);
        }
        assert!((wv - sum_v).abs() < 1e-6);
        // Spans tile the run in order.
        for i in 1..h.len() {
            assert!(h.span(i).0 > h.span(i - 1).1);
        }
        assert!(h.span(0).0.abs() < 1e-12);
        assert!((h.span(h.len() - 1).1 - 99.0).abs() < 1e-12);
        // The climb (values 0..4.5, five noise sds apart) had to be merged in
        // pairs while it filled the buffer, but the 90 plateau readings went
        // into plateau slots only and took nothing more from it.
        let plateau_slots = (0..h.len()).filter(|&i| h.slot(i).1 > 4.9).count();
        let on_plateau: u32 = (0..h.len())
            .filter(|&i| h.slot(i).1 > 4.9)
            .map(|i| u32::from(h.slot(i).2))
            .sum();
        assert_eq!(on_plateau, 90, "{h:?}");
        assert!(h.len() - plateau_slots >= 5, "{h:?}");
        // The climb's slots hold only climb readings.
        let climb: u32 = (0..h.len())
            .filter(|&i| h.slot(i).1 <= 4.9)
            .map(|i| u32::from(h.slot(i).2))
            .sum();
        assert_eq!(climb, 10, "{h:?}");
    }

    #[test]
    fn duplicate_time_is_averaged_into_the_newest_slot() {
        let mut h = History::<f32, 8>::new();
        h.push(1.0, 0.1, |_| 1.0);
        h.push(1.0, 0.3, |_| 1.0);
        assert_eq!(h.len(), 1);
        let (t, v, c) = h.slot(0);
        assert_eq!((t, c), (1.0, 2));
        assert_eq!(h.span(0), (1.0, 1.0));
        assert!((v - 0.2).abs() < 1e-7);
    }
}
