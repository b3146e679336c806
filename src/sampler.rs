//! A sensor sampler for the project's own photodiode front end, generic over
//! embedded-hal 1.0 [`I2c`] and [`DelayNs`].
//!
//! # The front end: "PLT-PD24" (invented for this project)
//!
//! PLT-PD24 is not a real part. It is a register model the project defines so the
//! firmware, the tests and any board that adopts it agree on one protocol: a
//! photodiode, a transimpedance stage, a 24-bit ADC and an LED driver behind an
//! I2C interface.
//!
//! * 7-bit I2C address [`DEFAULT_ADDRESS`] = `0x3A` (`0x3B` with its ADDR pin
//!   high).
//! * Registers are one byte wide; a write is `[register, value]`; a read is a
//!   write of the register number followed by a repeated-start read. Reads
//!   auto-increment, so the three count bytes come in one transaction.
//!
//! | address | name | access | meaning |
//! |---|---|---|---|
//! | `0x00` | `ID` | r | always [`DEVICE_ID`] = `0x5D` |
//! | `0x01` | `CONTROL` | w | bit 0 `START` (self-clearing) begins one conversion; bit 1 `LED_ON` lights the LED for it |
//! | `0x02` | `STATUS` | r | bit 0 `READY`: a conversion finished (cleared by reading `COUNTS`); bit 1 `OVERRANGE`: the input clipped |
//! | `0x03` | `LED_CURRENT` | r/w | LED current, 1 mA per step, 0–100 mA |
//! | `0x04`–`0x06` | `COUNTS` | r | last result, 24 bits, big-endian (most significant byte at `0x04`) |
//!
//! A conversion takes at most [`SamplerConfig::poll_interval_us`] ×
//! [`SamplerConfig::max_polls`] by the sampler's reckoning; the part's nominal
//! conversion time is whatever the board designer sets, so both are settings.
//!
//! # What the sampler does
//!
//! [`Sampler::measure`] triggers `conversions` conversions one after another,
//! polls `READY` with a bounded number of waits, reads each result, averages
//! them and hands the mean counts to a [`Photometer`]. If any conversion clipped
//! (`OVERRANGE`, or the code at full scale) the reading is
//! [`Reading::FullScale`] instead of a mean that would hide the clipping. Bus
//! errors come back as [`SamplerError::Bus`], never as a panic.

use core::fmt;

use embedded_hal::delay::DelayNs;
use embedded_hal::i2c::{self, I2c};

use crate::photometer::{Photometer, Reading};
use crate::{Error, Real};

/// Default 7-bit I2C address of the PLT-PD24 (ADDR pin low).
pub const DEFAULT_ADDRESS: u8 = 0x3A;
/// Value of the `ID` register.
pub const DEVICE_ID: u8 = 0x5D;
/// Largest code of the 24-bit `COUNTS` register.
pub const FULL_SCALE_COUNTS: u32 = 0x00FF_FFFF;
/// Largest LED current the part accepts, milliamperes.
pub const MAX_LED_CURRENT_MA: u8 = 100;

/// PLT-PD24 register addresses.
pub mod register {
    /// Device identity, reads [`DEVICE_ID`](super::DEVICE_ID).
    pub const ID: u8 = 0x00;
    /// Conversion control.
    pub const CONTROL: u8 = 0x01;
    /// Conversion status.
    pub const STATUS: u8 = 0x02;
    /// LED current, 1 mA per step.
    pub const LED_CURRENT: u8 = 0x03;
    /// First (most significant) of the three count bytes.
    pub const COUNTS: u8 = 0x04;
}

/// Bits of the PLT-PD24 `CONTROL` register.
pub mod control {
    /// Begin one conversion (self-clearing).
    pub const START: u8 = 1 << 0;
    /// Light the LED during the conversion.
    pub const LED_ON: u8 = 1 << 1;
}

/// Bits of the PLT-PD24 `STATUS` register.
pub mod status {
    /// A conversion finished; cleared by reading `COUNTS`.
    pub const READY: u8 = 1 << 0;
    /// The last conversion clipped.
    pub const OVERRANGE: u8 = 1 << 1;
}

/// Validated sampler settings.
///
/// Units: `poll_interval_us` in microseconds; `led_current_ma` in milliamperes;
/// `conversions` and `max_polls` are counts.
///
/// # Examples
///
/// ```
/// use plateau::SamplerConfig;
/// // Average 4 conversions, poll every 500 µs, give up after 20 polls (10 ms).
/// let config = SamplerConfig::new(4, 500, 20, 30)?;
/// assert_eq!(config.timeout_us(), 10_000);
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SamplerConfig {
    conversions: u8,
    poll_interval_us: u32,
    max_polls: u16,
    led_current_ma: u8,
}

impl SamplerConfig {
    /// Averages `conversions` conversions per reading; waits `poll_interval_us`
    /// before each look at `READY`, at most `max_polls` times per conversion;
    /// drives the LED at `led_current_ma`.
    ///
    /// # Errors
    ///
    /// * `conversions`, `poll_interval_us`, `max_polls`: not zero
    ///   ([`Error::NotPositive`]).
    /// * `led_current_ma`: 1 to [`MAX_LED_CURRENT_MA`] ([`Error::OutOfRange`]).
    pub const fn new(
        conversions: u8,
        poll_interval_us: u32,
        max_polls: u16,
        led_current_ma: u8,
    ) -> Result<Self, Error> {
        if conversions == 0 {
            return Err(Error::NotPositive {
                parameter: "conversions",
            });
        }
        if poll_interval_us == 0 {
            return Err(Error::NotPositive {
                parameter: "poll_interval_us",
            });
        }
        if max_polls == 0 {
            return Err(Error::NotPositive {
                parameter: "max_polls",
            });
        }
        if led_current_ma == 0 || led_current_ma > MAX_LED_CURRENT_MA {
            return Err(Error::OutOfRange {
                parameter: "led_current_ma",
            });
        }
        Ok(Self {
            conversions,
            poll_interval_us,
            max_polls,
            led_current_ma,
        })
    }

    /// Conversions averaged per reading.
    pub const fn conversions(&self) -> u8 {
        self.conversions
    }
    /// Wait before each status poll, microseconds.
    pub const fn poll_interval_us(&self) -> u32 {
        self.poll_interval_us
    }
    /// Status polls allowed per conversion.
    pub const fn max_polls(&self) -> u16 {
        self.max_polls
    }
    /// LED current, milliamperes.
    pub const fn led_current_ma(&self) -> u8 {
        self.led_current_ma
    }
    /// Longest wait for one conversion, microseconds (saturating).
    pub const fn timeout_us(&self) -> u32 {
        self.poll_interval_us.saturating_mul(self.max_polls as u32)
    }
}

/// What went wrong talking to the front end.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SamplerError<E> {
    /// The I2C bus reported an error (for example a NACK); the bus error is kept.
    Bus(E),
    /// `READY` did not rise within [`SamplerConfig::timeout_us`].
    Timeout,
    /// The `ID` register did not read [`DEVICE_ID`]; the value read is kept.
    WrongDevice {
        /// What the `ID` register held.
        id: u8,
    },
}

impl<E: i2c::Error> SamplerError<E> {
    /// The embedded-hal error kind, for bus errors.
    pub fn bus_kind(&self) -> Option<i2c::ErrorKind> {
        match self {
            Self::Bus(e) => Some(e.kind()),
            _ => None,
        }
    }
}

impl<E> From<E> for SamplerError<E> {
    fn from(e: E) -> Self {
        Self::Bus(e)
    }
}

impl<E: fmt::Debug> fmt::Display for SamplerError<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Bus(e) => write!(f, "photodiode front end: I2C error {e:?}"),
            Self::Timeout => f.write_str("photodiode front end: conversion timed out"),
            Self::WrongDevice { id } => {
                write!(f, "photodiode front end: ID register reads {id:#04x}")
            }
        }
    }
}

impl<E: fmt::Debug> core::error::Error for SamplerError<E> {}

/// The mean of one batch of conversions.
///
/// Units: `mean_counts` in ADC codes.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct MeanCounts<T> {
    /// Mean of the conversions' counts.
    pub mean_counts: T,
    /// True if any conversion clipped (`OVERRANGE` or the full-scale code).
    pub clipped: bool,
}

/// Drives one PLT-PD24 front end: owns the bus and the delay.
///
/// # Examples
///
/// ```
/// use embedded_hal_mock::eh1::delay::NoopDelay;
/// use embedded_hal_mock::eh1::i2c::{Mock, Transaction};
/// use plateau::sampler::{DEFAULT_ADDRESS as A, control, register, status};
/// use plateau::{Photometer, PhotometerConfig, Sampler, SamplerConfig};
///
/// let expect = [
///     Transaction::write(A, vec![register::CONTROL, control::START | control::LED_ON]),
///     Transaction::write_read(A, vec![register::STATUS], vec![status::READY]),
///     // 1 100 counts = 0x00044C.
///     Transaction::write_read(A, vec![register::COUNTS], vec![0x00, 0x04, 0x4C]),
/// ];
/// let mut bus = Mock::new(&expect);
/// let mut sampler = Sampler::new(bus.clone(), NoopDelay, A, SamplerConfig::new(1, 100, 5, 20)?);
/// // Invented channel: dark 100, blank 10 100 counts, 1 cm: A = log10(10) = 1.
/// let photometer = Photometer::new(PhotometerConfig::<f32>::new(100.0, 10_100.0, 16_777_215.0, 1.0)?);
/// let od = sampler.measure(&photometer).unwrap().od().unwrap();
/// assert!((od - 1.0).abs() < 2e-3); // loose enough for `fast-math`
/// bus.done();
/// # Ok::<(), plateau::Error>(())
/// ```
#[derive(Debug)]
pub struct Sampler<I, D> {
    i2c: I,
    delay: D,
    address: u8,
    config: SamplerConfig,
}

impl<I: I2c, D: DelayNs> Sampler<I, D> {
    /// Takes the bus and a delay; `address` is the 7-bit I2C address
    /// ([`DEFAULT_ADDRESS`] unless the ADDR pin is high). Does not touch the bus.
    pub fn new(i2c: I, delay: D, address: u8, config: SamplerConfig) -> Self {
        Self {
            i2c,
            delay,
            address,
            config,
        }
    }

    /// Checks the `ID` register and sets the LED current.
    ///
    /// # Errors
    ///
    /// [`SamplerError::Bus`] on a bus error, [`SamplerError::WrongDevice`] if
    /// the identity does not match.
    pub fn init(&mut self) -> Result<(), SamplerError<I::Error>> {
        let mut id = [0_u8];
        self.i2c
            .write_read(self.address, &[register::ID], &mut id)?;
        if id[0] != DEVICE_ID {
            return Err(SamplerError::WrongDevice { id: id[0] });
        }
        self.i2c.write(
            self.address,
            &[register::LED_CURRENT, self.config.led_current_ma],
        )?;
        Ok(())
    }

    /// Runs one conversion: trigger, bounded wait for `READY`, read the counts.
    /// Returns the counts and whether the part flagged `OVERRANGE`.
    ///
    /// Bounded time: at most `max_polls` waits of `poll_interval_us`.
    ///
    /// # Errors
    ///
    /// [`SamplerError::Bus`] on a bus error; [`SamplerError::Timeout`] if
    /// `READY` never rose.
    pub fn convert_once(&mut self) -> Result<(u32, bool), SamplerError<I::Error>> {
        self.i2c.write(
            self.address,
            &[register::CONTROL, control::START | control::LED_ON],
        )?;
        let mut ready = None;
        for _ in 0..self.config.max_polls {
            self.delay.delay_us(self.config.poll_interval_us);
            let mut s = [0_u8];
            self.i2c
                .write_read(self.address, &[register::STATUS], &mut s)?;
            if s[0] & status::READY != 0 {
                ready = Some(s[0]);
                break;
            }
        }
        let Some(s) = ready else {
            return Err(SamplerError::Timeout);
        };
        let mut bytes = [0_u8; 3];
        self.i2c
            .write_read(self.address, &[register::COUNTS], &mut bytes)?;
        let counts = u32::from_be_bytes([0, bytes[0], bytes[1], bytes[2]]);
        Ok((counts, s & status::OVERRANGE != 0))
    }

    /// Averages `conversions` conversions.
    ///
    /// # Errors
    ///
    /// As [`convert_once`](Self::convert_once); the first error ends the batch.
    pub fn read_mean<T: Real>(&mut self) -> Result<MeanCounts<T>, SamplerError<I::Error>> {
        // 255 conversions of at most 2^24 − 1 counts fit in a u32.
        let mut sum: u32 = 0;
        let mut clipped = false;
        for _ in 0..self.config.conversions {
            let (counts, overrange) = self.convert_once()?;
            clipped |= overrange || counts >= FULL_SCALE_COUNTS;
            sum = sum.saturating_add(counts);
        }
        Ok(MeanCounts {
            mean_counts: T::from_u32(sum) / T::from_u32(u32::from(self.config.conversions)),
            clipped,
        })
    }

    /// Takes one reading: averages the conversions and converts the mean with
    /// `photometer`. A batch in which any conversion clipped gives
    /// [`Reading::FullScale`].
    ///
    /// # Errors
    ///
    /// As [`read_mean`](Self::read_mean).
    pub fn measure<T: Real, const N: usize>(
        &mut self,
        photometer: &Photometer<T, N>,
    ) -> Result<Reading<T>, SamplerError<I::Error>> {
        let mean = self.read_mean::<T>()?;
        if mean.clipped {
            return Ok(Reading::FullScale);
        }
        Ok(photometer.convert(mean.mean_counts))
    }

    /// The settings.
    pub fn config(&self) -> &SamplerConfig {
        &self.config
    }

    /// Gives back the bus and the delay.
    pub fn release(self) -> (I, D) {
        (self.i2c, self.delay)
    }
}

#[cfg(test)]
mod tests {
    extern crate std;
    use std::vec;
    use std::vec::Vec;

    use super::*;
    use crate::photometer::PhotometerConfig;
    use embedded_hal::i2c::ErrorKind;
    use embedded_hal_mock::eh1::delay::{CheckedDelay, NoopDelay, Transaction as DelayTx};
    use embedded_hal_mock::eh1::i2c::{Mock, Transaction as Tx};

    const A: u8 = DEFAULT_ADDRESS;

    fn start() -> Tx {
        Tx::write(A, vec![register::CONTROL, control::START | control::LED_ON])
    }
    fn poll(status_byte: u8) -> Tx {
        Tx::write_read(A, vec![register::STATUS], vec![status_byte])
    }
    fn counts(value: u32) -> Tx {
        let b = value.to_be_bytes();
        Tx::write_read(A, vec![register::COUNTS], vec![b[1], b[2], b[3]])
    }
    fn photometer() -> Photometer<f64> {
        // Invented channel: dark 100, blank 10 100 counts, 24-bit, 1 cm.
        Photometer::new(PhotometerConfig::new(100.0, 10_100.0, 16_777_215.0, 1.0).unwrap())
    }

    #[test]
    fn init_checks_identity_and_sets_led_current() {
        let expect = [
            Tx::write_read(A, vec![register::ID], vec![DEVICE_ID]),
            Tx::write(A, vec![register::LED_CURRENT, 25]),
        ];
        let mut bus = Mock::new(&expect);
        let cfg = SamplerConfig::new(1, 100, 3, 25).unwrap();
        let mut s = Sampler::new(bus.clone(), NoopDelay, A, cfg);
        s.init().unwrap();
        bus.done();
    }

    #[test]
    fn init_rejects_a_different_part() {
        let expect = [Tx::write_read(A, vec![register::ID], vec![0x42])];
        let mut bus = Mock::new(&expect);
        let cfg = SamplerConfig::new(1, 100, 3, 25).unwrap();
        let mut s = Sampler::new(bus.clone(), NoopDelay, A, cfg);
        assert_eq!(s.init(), Err(SamplerError::WrongDevice { id: 0x42 }));
        bus.done();
    }

    #[test]
    fn averages_conversions_and_applies_beer_lambert() {
        // Mean of 1 000 and 1 200 counts is 1 100; minus dark 100 gives
        // I = 1 000 against I0 = 10 000: A = log10(10) = 1 (Beer–Lambert, by hand).
        // The first conversion needs two polls, the second one.
        let expect = [
            start(),
            poll(0),
            poll(status::READY),
            counts(1_000),
            start(),
            poll(status::READY),
            counts(1_200),
        ];
        let mut bus = Mock::new(&expect);
        // Each poll is preceded by one 250 µs wait: three in all.
        let waits: Vec<DelayTx> = (0..3).map(|_| DelayTx::delay_us(250)).collect();
        let mut delay = CheckedDelay::new(&waits);
        let cfg = SamplerConfig::new(2, 250, 4, 20).unwrap();
        let mut s = Sampler::new(bus.clone(), delay.clone(), A, cfg);
        let od = s.measure(&photometer()).unwrap().od().unwrap();
        assert!((od - 1.0).abs() < 1e-12);
        bus.done();
        delay.done();
    }

    #[test]
    fn reads_24_bit_big_endian_counts() {
        let expect = [start(), poll(status::READY), counts(0x00AB_CDEF)];
        let mut bus = Mock::new(&expect);
        let cfg = SamplerConfig::new(1, 100, 3, 20).unwrap();
        let mut s = Sampler::new(bus.clone(), NoopDelay, A, cfg);
        assert_eq!(s.convert_once().unwrap(), (0x00AB_CDEF, false));
        bus.done();
    }

    #[test]
    fn timeout_after_bounded_polls() {
        // max_polls = 3: three waits, three polls, then Timeout; no counts read.
        let expect = [start(), poll(0), poll(0), poll(0)];
        let mut bus = Mock::new(&expect);
        let waits: Vec<DelayTx> = (0..3).map(|_| DelayTx::delay_us(100)).collect();
        let mut delay = CheckedDelay::new(&waits);
        let cfg = SamplerConfig::new(1, 100, 3, 20).unwrap();
        let mut s = Sampler::new(bus.clone(), delay.clone(), A, cfg);
        assert_eq!(s.measure(&photometer()), Err(SamplerError::Timeout));
        bus.done();
        delay.done();
    }

    #[test]
    fn nack_comes_back_as_a_typed_bus_error() {
        let nack = ErrorKind::NoAcknowledge(embedded_hal::i2c::NoAcknowledgeSource::Address);
        let expect = [
            Tx::write(A, vec![register::CONTROL, control::START | control::LED_ON])
                .with_error(nack),
        ];
        let mut bus = Mock::new(&expect);
        let cfg = SamplerConfig::new(1, 100, 3, 20).unwrap();
        let mut s = Sampler::new(bus.clone(), NoopDelay, A, cfg);
        let err = s.measure(&photometer()).unwrap_err();
        assert_eq!(err, SamplerError::Bus(nack));
        assert_eq!(err.bus_kind(), Some(nack));
        bus.done();
    }

    #[test]
    fn bus_error_mid_batch_ends_the_batch() {
        let expect = [
            start(),
            poll(status::READY),
            counts(5_000),
            start(),
            poll(status::READY),
            Tx::write_read(A, vec![register::COUNTS], vec![0, 0, 0]).with_error(ErrorKind::Bus),
        ];
        let mut bus = Mock::new(&expect);
        let cfg = SamplerConfig::new(3, 100, 3, 20).unwrap();
        let mut s = Sampler::new(bus.clone(), NoopDelay, A, cfg);
        assert_eq!(
            s.measure(&photometer()),
            Err(SamplerError::Bus(ErrorKind::Bus))
        );
        bus.done();
    }

    #[test]
    fn clipping_in_any_conversion_flags_full_scale() {
        // First batch: its second conversion reports OVERRANGE. Second batch: its
        // one conversion returns the full-scale code. Either way: FullScale, not
        // a mean that would hide the clipping.
        let expect = [
            start(),
            poll(status::READY),
            counts(5_000),
            start(),
            poll(status::READY | status::OVERRANGE),
            counts(9_000_000),
            start(),
            poll(status::READY),
            counts(FULL_SCALE_COUNTS),
        ];
        let mut bus = Mock::new(&expect);
        let mut s = Sampler::new(
            bus.clone(),
            NoopDelay,
            A,
            SamplerConfig::new(2, 100, 3, 20).unwrap(),
        );
        assert_eq!(s.measure(&photometer()), Ok(Reading::FullScale));
        let (i2c, delay) = s.release();
        let mut s = Sampler::new(i2c, delay, A, SamplerConfig::new(1, 100, 3, 20).unwrap());
        assert_eq!(s.measure(&photometer()), Ok(Reading::FullScale));
        bus.done();
    }

    #[test]
    fn config_names_the_bad_parameter() {
        let p = |r: Result<SamplerConfig, Error>| r.unwrap_err().parameter();
        assert_eq!(p(SamplerConfig::new(0, 1, 1, 1)), Some("conversions"));
        assert_eq!(p(SamplerConfig::new(1, 0, 1, 1)), Some("poll_interval_us"));
        assert_eq!(p(SamplerConfig::new(1, 1, 0, 1)), Some("max_polls"));
        assert_eq!(p(SamplerConfig::new(1, 1, 1, 0)), Some("led_current_ma"));
        assert_eq!(p(SamplerConfig::new(1, 1, 1, 101)), Some("led_current_ma"));
        assert_eq!(
            SamplerConfig::new(1, u32::MAX, 2, 1).unwrap().timeout_us(),
            u32::MAX
        );
    }
}
