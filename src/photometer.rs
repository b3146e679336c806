//! Optical density from raw detector counts, by the Beer–Lambert law.
//!
//! A photometer shines light through the culture and counts what reaches the
//! detector. With the detector's dark level (LED off, or no light) subtracted
//! from both the sample reading I and the blank (medium-only) reading I0, the
//! absorbance over the vessel's path is
//!
//! ```text
//! A = log10(I0 / I) = log10((blank − dark) / (counts − dark))
//! ```
//!
//! (Beer–Lambert law). Absorbance grows with the path length, so the result is
//! normalised to the 1 cm path that optical densities are quoted for:
//! OD = A / `path_length_cm`.
//!
//! For cell suspensions most of the "absorbance" is scattering, so the value
//! depends on the instrument and the strain; readings are most trustworthy
//! between about 0.1 and 1 OD, and many instruments read low above 1–2 OD
//! (common practice). A short calibration table ([`Linearity`]) can map this
//! instrument's apparent absorbance to the true one at high OD.
//!
//! Readings the law cannot turn into a number are returned as such, not as
//! nonsense: a detector at full scale ([`Reading::FullScale`]), counts at or
//! below the dark level ([`Reading::AtOrBelowDark`]), or a non-finite input
//! ([`Reading::Invalid`]).
//!
//! # Why generic over [`Real`]
//!
//! The conversion is a formula like the model math: written once over `T: Real`,
//! it runs in `f32` on the device and in `f64` for host references, and its one
//! transcendental call (`log10`) goes through the crate's math backend, so the
//! host tests the very function the device runs. Counts are passed as `T`
//! because the sampler hands over a mean of several conversions, which is
//! fractional; 24-bit counts are exact in `f32`.

use crate::error::{finite, non_negative, positive};
use crate::{Error, Real};

/// The common-practice range, in OD (1 cm), where photometric readings of
/// cultures are most accurate: about 0.1 to 1.0 (common practice).
pub const COMMON_LINEAR_RANGE_OD: (f64, f64) = (0.1, 1.0);

/// Validated settings of one photometric channel.
///
/// Units: `dark_counts`, `blank_counts` and `full_scale_counts` in raw detector
/// counts (ADC codes); `path_length_cm` in centimetres.
///
/// # Examples
///
/// ```
/// use plateau::PhotometerConfig;
/// // Invented channel: dark 100 counts, blank 10 100 counts, 16-bit ADC, 1 cm cuvette.
/// let config = PhotometerConfig::<f32>::new(100.0, 10_100.0, 65_535.0, 1.0)?;
/// assert!((config.blank_counts() - 10_100.0).abs() < 1e-3);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PhotometerConfig<T> {
    dark_counts: T,
    blank_counts: T,
    full_scale_counts: T,
    path_length_cm: T,
}

impl<T: Real> PhotometerConfig<T> {
    /// Builds a channel from its dark level, its blank (medium-only) reading, the
    /// ADC's full-scale code and the vessel's optical path length.
    ///
    /// Units: counts for the first three, centimetres for `path_length_cm`.
    ///
    /// # Errors
    ///
    /// * `dark_counts`: finite and not negative.
    /// * `blank_counts`: finite, above `dark_counts` and below
    ///   `full_scale_counts` ([`Error::OutOfRange`]); a blank at full scale
    ///   would hide how bright the light really is.
    /// * `full_scale_counts`: finite and positive.
    /// * `path_length_cm`: finite and positive.
    pub fn new(
        dark_counts: T,
        blank_counts: T,
        full_scale_counts: T,
        path_length_cm: T,
    ) -> Result<Self, Error> {
        let dark_counts = non_negative(dark_counts, "dark_counts")?;
        let full_scale_counts = positive(full_scale_counts, "full_scale_counts")?;
        let blank_counts = finite(blank_counts, "blank_counts")?;
        if blank_counts <= dark_counts || blank_counts >= full_scale_counts {
            return Err(Error::OutOfRange {
                parameter: "blank_counts",
            });
        }
        let path_length_cm = positive(path_length_cm, "path_length_cm")?;
        Ok(Self {
            dark_counts,
            blank_counts,
            full_scale_counts,
            path_length_cm,
        })
    }

    /// Dark level, counts.
    pub fn dark_counts(&self) -> T {
        self.dark_counts
    }
    /// Blank (medium-only) reading, counts.
    #[doc(alias = "I0")]
    pub fn blank_counts(&self) -> T {
        self.blank_counts
    }
    /// The ADC's full-scale code, counts.
    pub fn full_scale_counts(&self) -> T {
        self.full_scale_counts
    }
    /// Optical path length through the vessel, centimetres.
    pub fn path_length_cm(&self) -> T {
        self.path_length_cm
    }
}

/// A piecewise-linear map from this instrument's apparent absorbance to the true
/// absorbance, for the high-OD range where the reading turns nonlinear.
///
/// The table holds up to `N` points `(apparent, true)`, both in absorbance units
/// over the vessel's own path (before normalisation to 1 cm), strictly increasing
/// in both columns. The origin (0, 0) is an implicit first point: below the first
/// point the map is the line through the origin. Above the last point the last
/// segment is extended and the reading is flagged
/// ([`OpticalDensity::beyond_calibration`]). An empty table is the identity.
///
/// Units: absorbance (dimensionless, base-10) in both columns.
///
/// # Examples
///
/// ```
/// use plateau::Linearity;
/// // Invented table: the instrument reads 2.0 where a diluted reference says 2.5.
/// let table = Linearity::<f64, 4>::new(&[(1.0, 1.0), (2.0, 2.5), (3.0, 4.5)])?;
/// let (corrected, beyond) = table.correct(1.5);
/// assert!((corrected - 1.75).abs() < 1e-12 && !beyond);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Linearity<T, const N: usize> {
    apparent: [T; N],
    corrected: [T; N],
    len: usize,
}

impl<T: Real, const N: usize> Linearity<T, N> {
    /// No correction: the identity map.
    pub fn identity() -> Self {
        Self {
            apparent: [T::ZERO; N],
            corrected: [T::ZERO; N],
            len: 0,
        }
    }

    /// Builds the table from `(apparent, true)` absorbance pairs.
    ///
    /// # Errors
    ///
    /// * `linearity_points` ([`Error::OutOfRange`]): more than `N` points.
    /// * `linearity_apparent`: each value finite ([`Error::NotFinite`]), the
    ///   first positive ([`Error::NotPositive`]) and the column strictly
    ///   increasing ([`Error::OutOfRange`]).
    /// * `linearity_true`: the same rules for the second column.
    pub fn new(points: &[(T, T)]) -> Result<Self, Error> {
        if points.len() > N {
            return Err(Error::OutOfRange {
                parameter: "linearity_points",
            });
        }
        let mut table = Self::identity();
        let (mut last_apparent, mut last_true) = (T::ZERO, T::ZERO);
        for (i, &(apparent, corrected)) in points.iter().enumerate() {
            let apparent = positive(apparent, "linearity_apparent")?;
            let corrected = positive(corrected, "linearity_true")?;
            if i > 0 && apparent <= last_apparent {
                return Err(Error::OutOfRange {
                    parameter: "linearity_apparent",
                });
            }
            if i > 0 && corrected <= last_true {
                return Err(Error::OutOfRange {
                    parameter: "linearity_true",
                });
            }
            table.apparent[i] = apparent;
            table.corrected[i] = corrected;
            (last_apparent, last_true) = (apparent, corrected);
        }
        table.len = points.len();
        Ok(table)
    }

    /// Number of points in use (at most `N`).
    pub fn len(&self) -> usize {
        self.len
    }

    /// True when the table is the identity.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Maps an apparent absorbance to the true one; the flag is true when the
    /// input lies above the last calibration point (extrapolated).
    ///
    /// Bounded time: at most `N` comparisons. Never panics.
    pub fn correct(&self, apparent: T) -> (T, bool) {
        let len = self.len.min(N);
        if len == 0 {
            return (apparent, false);
        }
        let (mut x0, mut y0) = (T::ZERO, T::ZERO);
        for i in 0..len {
            let (x1, y1) = (self.apparent[i], self.corrected[i]);
            if apparent <= x1 || i + 1 == len {
                let value = y0 + (apparent - x0) * (y1 - y0) / (x1 - x0);
                return (value, apparent > x1);
            }
            (x0, y0) = (x1, y1);
        }
        (apparent, false)
    }
}

impl<T: Real, const N: usize> Default for Linearity<T, N> {
    fn default() -> Self {
        Self::identity()
    }
}

/// A usable optical density.
///
/// Units: `od` in OD units normalised to a 1 cm path (after the linearity
/// correction); `absorbance` in absorbance units over the vessel's own path,
/// as measured (before correction and normalisation).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct OpticalDensity<T> {
    /// Optical density at 1 cm, corrected for linearity. Slightly negative
    /// values are possible (a reading a little brighter than the blank).
    pub od: T,
    /// The raw Beer–Lambert absorbance log10(I0 / I) over the vessel's path.
    #[doc(alias = "A")]
    pub absorbance: T,
    /// True when the linearity correction had to extrapolate beyond its table.
    pub beyond_calibration: bool,
}

impl<T: Real> OpticalDensity<T> {
    /// True when `od` lies in the common-practice accurate range of about
    /// 0.1–1.0 OD ([`COMMON_LINEAR_RANGE_OD`]).
    pub fn in_common_linear_range(&self) -> bool {
        let (lo, hi) = COMMON_LINEAR_RANGE_OD;
        self.od >= T::from_f64(lo) && self.od <= T::from_f64(hi)
    }
}

/// What one detector reading turned into.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Reading<T> {
    /// A usable optical density.
    Od(OpticalDensity<T>),
    /// The detector was at (or above) the ADC's full scale: the real intensity
    /// is unknown, so no OD is given. Usually stray light or a lid left open.
    FullScale,
    /// The counts were at or below the dark level: no light measurably passed,
    /// so the OD is beyond what this channel can measure (or the source is off).
    AtOrBelowDark,
    /// The counts were NaN or infinite.
    Invalid,
}

impl<T: Copy> Reading<T> {
    /// The optical density, if the reading gave one.
    pub fn od(&self) -> Option<T> {
        match self {
            Self::Od(value) => Some(value.od),
            _ => None,
        }
    }
}

/// Turns detector counts into optical density: a validated, `Copy` channel
/// configuration plus an optional linearity table of capacity `N`.
///
/// The conversion is stateless (a pure function of the counts), so there is no
/// separate running state: keep one `Photometer` per channel, for example in a
/// `static`.
///
/// Units: see [`PhotometerConfig`] and [`OpticalDensity`].
///
/// # Examples
///
/// ```
/// use plateau::{Photometer, PhotometerConfig, Reading};
/// // Invented channel: dark 100, blank 10 100 counts, 0.5 cm flow cell.
/// let config = PhotometerConfig::<f32>::new(100.0, 10_100.0, 65_535.0, 0.5)?;
/// let photometer = Photometer::new(config);
/// // 1 000 counts above dark is a tenth of the blank's: A = log10(10) = 1 over
/// // 0.5 cm, so 2 OD at 1 cm (Beer–Lambert).
/// let od = photometer.convert(1_100.0).od().unwrap();
/// // Tolerance covers the `fast-math` backend (about 1e-3 on log10).
/// assert!((od - 2.0).abs() < 2e-3);
/// assert_eq!(photometer.convert(65_535.0), Reading::FullScale);
/// assert_eq!(photometer.convert(90.0), Reading::AtOrBelowDark);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Photometer<T, const N: usize = 0> {
    config: PhotometerConfig<T>,
    linearity: Linearity<T, N>,
}

impl<T: Real> Photometer<T, 0> {
    /// A photometer without linearity correction.
    pub fn new(config: PhotometerConfig<T>) -> Self {
        Self {
            config,
            linearity: Linearity::identity(),
        }
    }
}

impl<T: Real, const N: usize> Photometer<T, N> {
    /// A photometer whose absorbance goes through `linearity` before it is
    /// normalised to 1 cm.
    pub fn with_linearity(config: PhotometerConfig<T>, linearity: Linearity<T, N>) -> Self {
        Self { config, linearity }
    }

    /// The channel settings.
    pub fn config(&self) -> &PhotometerConfig<T> {
        &self.config
    }

    /// The linearity table.
    pub fn linearity(&self) -> &Linearity<T, N> {
        &self.linearity
    }

    /// Converts raw detector counts (one conversion or a mean of several).
    ///
    /// Bounded time, never panics: unusable counts come back as
    /// [`Reading::FullScale`], [`Reading::AtOrBelowDark`] or
    /// [`Reading::Invalid`].
    ///
    /// Units: `counts` in ADC codes; see [`OpticalDensity`] for the result.
    pub fn convert(&self, counts: T) -> Reading<T> {
        let c = &self.config;
        if !counts.is_finite() {
            return Reading::Invalid;
        }
        if counts >= c.full_scale_counts {
            return Reading::FullScale;
        }
        if counts <= c.dark_counts {
            return Reading::AtOrBelowDark;
        }
        // Beer–Lambert: A = log10(I0 / I), both intensities dark-corrected.
        let absorbance = ((c.blank_counts - c.dark_counts) / (counts - c.dark_counts)).log10();
        let (corrected, beyond_calibration) = self.linearity.correct(absorbance);
        Reading::Od(OpticalDensity {
            od: corrected / c.path_length_cm,
            absorbance,
            beyond_calibration,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    fn channel(path_length_cm: f64) -> PhotometerConfig<f64> {
        // Invented channel: dark 100 counts, blank 10 100 counts (so I0 = 10 000
        // after dark correction), 16-bit full scale.
        PhotometerConfig::new(100.0, 10_100.0, 65_535.0, path_length_cm).unwrap()
    }

    #[test]
    fn beer_lambert_hand_computed_values() {
        // Beer–Lambert law A = log10(I0 / I), computed by hand with I0 = 10 000:
        // I = 1 000 -> A = 1; I = 100 -> A = 2; I = I0 -> A = 0;
        // I = 10 000 / sqrt(10) = 3 162.2776601683795 -> A = 0.5.
        let p = Photometer::new(channel(1.0));
        let od = |counts: f64| p.convert(counts).od().unwrap();
        assert!(close(od(1_100.0), 1.0, 1e-12));
        assert!(close(od(200.0), 2.0, 1e-12));
        assert!(close(od(10_100.0), 0.0, 1e-12));
        assert!(close(od(100.0 + 3_162.277_660_168_379_5), 0.5, 1e-12));
        // Brighter than the blank: I = 40 000 -> A = log10(0.25) = -0.60206
        // (log10 4 = 2 log10 2 = 0.60206 to five places, standard table value [memory]).
        assert!(close(od(40_100.0), -0.602_06, 1e-5));
    }

    #[test]
    fn path_length_normalises_to_one_centimetre() {
        // Beer–Lambert: absorbance is proportional to path length, so A = 1 over
        // 0.5 cm is 2 OD at 1 cm, and over 2 cm is 0.5 OD at 1 cm (hand computation).
        let half = Photometer::new(channel(0.5)).convert(1_100.0);
        let two = Photometer::new(channel(2.0)).convert(1_100.0);
        match half {
            Reading::Od(v) => {
                assert!(close(v.absorbance, 1.0, 1e-12));
                assert!(close(v.od, 2.0, 1e-12));
                assert!(!v.beyond_calibration);
            }
            other => panic!("expected an OD, got {other:?}"),
        }
        assert!(close(two.od().unwrap(), 0.5, 1e-12));
    }

    #[test]
    fn full_scale_and_dark_are_flagged_not_converted() {
        let p = Photometer::new(channel(1.0));
        assert_eq!(p.convert(65_535.0), Reading::FullScale);
        assert_eq!(p.convert(70_000.0), Reading::FullScale);
        assert_eq!(p.convert(100.0), Reading::AtOrBelowDark);
        assert_eq!(p.convert(0.0), Reading::AtOrBelowDark);
        assert_eq!(p.convert(f64::NAN), Reading::Invalid);
        assert_eq!(p.convert(f64::INFINITY), Reading::Invalid);
        // One count above dark is finite: log10(10 000) = 4 (hand computation).
        assert!(close(p.convert(101.0).od().unwrap(), 4.0, 1e-12));
    }

    #[test]
    fn config_names_the_bad_parameter() {
        let e = |r: Result<PhotometerConfig<f64>, Error>| r.unwrap_err();
        assert_eq!(
            e(PhotometerConfig::new(-1.0, 100.0, 1000.0, 1.0)),
            Error::OutOfRange {
                parameter: "dark_counts"
            }
        );
        assert_eq!(
            e(PhotometerConfig::new(100.0, 100.0, 1000.0, 1.0)),
            Error::OutOfRange {
                parameter: "blank_counts"
            }
        );
        assert_eq!(
            e(PhotometerConfig::new(10.0, 1000.0, 1000.0, 1.0)),
            Error::OutOfRange {
                parameter: "blank_counts"
            }
        );
        assert_eq!(
            e(PhotometerConfig::new(10.0, f64::NAN, 1000.0, 1.0)),
            Error::NotFinite {
                parameter: "blank_counts"
            }
        );
        assert_eq!(
            e(PhotometerConfig::new(10.0, 100.0, 0.0, 1.0)),
            Error::NotPositive {
                parameter: "full_scale_counts"
            }
        );
        assert_eq!(
            e(PhotometerConfig::new(10.0, 100.0, 1000.0, 0.0)),
            Error::NotPositive {
                parameter: "path_length_cm"
            }
        );
    }

    #[test]
    fn linearity_interpolates_by_hand() {
        // Invented table; values below are hand-computed linear interpolation.
        let t = Linearity::<f64, 4>::new(&[(1.0, 1.0), (2.0, 2.5), (3.0, 4.5)]).unwrap();
        assert_eq!(t.len(), 3);
        let check = |x: f64, want: f64, beyond: bool| {
            let (y, b) = t.correct(x);
            assert!(close(y, want, 1e-12), "{x} -> {y}, want {want}");
            assert_eq!(b, beyond, "flag at {x}");
        };
        check(0.5, 0.5, false); // segment (0,0)-(1,1)
        check(1.0, 1.0, false);
        check(1.5, 1.75, false); // 1 + 0.5 * 1.5
        check(2.5, 3.5, false); // 2.5 + 0.5 * 2
        check(3.0, 4.5, false);
        check(4.0, 6.5, true); // last segment extended: 4.5 + 1 * 2
        // Identity when empty.
        assert_eq!(Linearity::<f64, 3>::identity().correct(2.7), (2.7, false));
    }

    #[test]
    fn linearity_is_applied_before_path_normalisation() {
        // A = 2 over 0.5 cm (I = 100 of I0 = 10 000), corrected to 2.5 by the
        // table, then 2.5 / 0.5 = 5 OD at 1 cm (hand computation).
        let t = Linearity::<f64, 2>::new(&[(1.0, 1.0), (2.0, 2.5)]).unwrap();
        let p = Photometer::with_linearity(channel(0.5), t);
        match p.convert(200.0) {
            Reading::Od(v) => {
                assert!(close(v.absorbance, 2.0, 1e-12));
                assert!(close(v.od, 5.0, 1e-12));
                assert!(!v.beyond_calibration);
            }
            other => panic!("expected an OD, got {other:?}"),
        }
    }

    #[test]
    fn linearity_table_is_validated() {
        type L = Linearity<f64, 3>;
        assert_eq!(
            L::new(&[(1.0, 1.0), (2.0, 2.0), (3.0, 3.0), (4.0, 4.0)]).unwrap_err(),
            Error::OutOfRange {
                parameter: "linearity_points"
            }
        );
        assert_eq!(
            L::new(&[(1.0, 1.0), (1.0, 2.0)]).unwrap_err(),
            Error::OutOfRange {
                parameter: "linearity_apparent"
            }
        );
        assert_eq!(
            L::new(&[(1.0, 2.0), (2.0, 1.5)]).unwrap_err(),
            Error::OutOfRange {
                parameter: "linearity_true"
            }
        );
        assert_eq!(
            L::new(&[(0.0, 1.0)]).unwrap_err(),
            Error::NotPositive {
                parameter: "linearity_apparent"
            }
        );
        assert_eq!(
            L::new(&[(1.0, f64::NAN)]).unwrap_err(),
            Error::NotFinite {
                parameter: "linearity_true"
            }
        );
        assert!(L::new(&[]).unwrap().is_empty());
    }

    #[test]
    fn common_linear_range_flag() {
        // Common practice: readings are most accurate between about 0.1 and 1 OD.
        let p = Photometer::new(channel(1.0));
        let in_range = |counts: f64| match p.convert(counts) {
            Reading::Od(v) => v.in_common_linear_range(),
            _ => false,
        };
        assert!(in_range(1_100.0)); // 1.0 OD
        assert!(in_range(100.0 + 3_162.277_660_168_379_5)); // 0.5 OD
        assert!(!in_range(200.0)); // 2.0 OD
        assert!(!in_range(10_000.0)); // log10(10 000 / 9 900) = 0.0044 OD
    }

    proptest::proptest! {
        // Invariants: Beer–Lambert absorbance falls as transmitted light rises,
        // and a strictly increasing table gives a strictly increasing map.
        #[test]
        fn od_falls_as_counts_rise(a in 101.0_f64..65_000.0, d in 1.0_f64..500.0) {
            let p = Photometer::new(channel(1.0));
            let b = (a + d).min(65_534.0);
            proptest::prop_assume!(b > a);
            let (oa, ob) = (p.convert(a).od().unwrap(), p.convert(b).od().unwrap());
            proptest::prop_assert!(ob < oa);
        }

        #[test]
        fn linearity_map_is_increasing(
            steps in proptest::collection::vec((0.05_f64..1.0, 0.05_f64..1.5), 1..6),
            x in 0.0_f64..8.0,
            dx in 1e-6_f64..1.0,
        ) {
            let mut points = [(0.0, 0.0); 6];
            let (mut ax, mut ty) = (0.0, 0.0);
            for (i, (sx, sy)) in steps.iter().enumerate() {
                ax += sx;
                ty += sy;
                points[i] = (ax, ty);
            }
            let t = Linearity::<f64, 6>::new(&points[..steps.len()]).unwrap();
            proptest::prop_assert!(t.correct(x + dx).0 > t.correct(x).0);
        }
    }

    #[test]
    fn f32_matches_f64_reference() {
        // The device path (f32) against the host reference (f64) over the
        // counts range of an invented 24-bit channel.
        let c32 = PhotometerConfig::<f32>::new(40_000.0, 12_000_000.0, 16_777_215.0, 1.0).unwrap();
        let c64 = PhotometerConfig::<f64>::new(40_000.0, 12_000_000.0, 16_777_215.0, 1.0).unwrap();
        let (p32, p64) = (Photometer::new(c32), Photometer::new(c64));
        let tol = if cfg!(feature = "fast-math") {
            // micromath ln: about 1e-3 absolute, times log10(e).
            2e-3
        } else {
            1e-5
        };
        let mut counts = 40_100_u32;
        while counts < 12_000_000 {
            #[allow(clippy::cast_precision_loss, reason = "24-bit counts are exact")]
            let x = counts as f32;
            let a = p32.convert(x).od().unwrap();
            let b = p64.convert(f64::from(x)).od().unwrap();
            assert!(close(f64::from(a), b, tol), "{counts}: {a} vs {b}");
            counts = counts * 5 / 4;
        }
    }
}
