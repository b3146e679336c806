//! A stand-in PLT-PD24 front end that answers on a pretend I2C bus from the
//! stored (invented) log, so the firmware runs the real [`plateau::Sampler`]
//! code path on a board that has no such part: QEMU's mps2-an386.
//!
//! It follows the register map documented in `plateau::sampler`: `ID` reads
//! the device identity, a `START` write begins a conversion, `STATUS` shows
//! `READY` after [`POLLS_UNTIL_READY`] polls, and `COUNTS` returns the next
//! conversion of the current log entry as three big-endian bytes.

use embedded_hal::delay::DelayNs;
use embedded_hal::i2c::{self, ErrorKind, I2c, Operation};
use plateau::sampler::{DEVICE_ID, FULL_SCALE_COUNTS, control, register, status};

/// Status polls that see "not ready" before `READY` rises.
pub const POLLS_UNTIL_READY: u8 = 1;

/// Offsets of the four conversions of one reading around the logged mean;
/// they sum to zero, so the sampler's mean is the logged value.
/// The sampler must average exactly [`CONVERSIONS_PER_READING`] conversions.
const SPREAD_COUNTS: [i32; 4] = [120, -120, 60, -60];

/// Conversions the front end serves per logged reading.
pub const CONVERSIONS_PER_READING: u8 = 4;

/// The pretend front end: serves `counts` (one logged mean per reading).
pub struct ReplayFrontEnd<'a> {
    address: u8,
    counts: &'a [u32],
    entry: usize,
    conversion: usize,
    pointer: u8,
    polls_left: u8,
    converting: bool,
    ready: bool,
    latest_counts: u32,
}

impl<'a> ReplayFrontEnd<'a> {
    /// A front end at `address` that will serve `counts` in order.
    pub fn new(address: u8, counts: &'a [u32]) -> Self {
        Self {
            address,
            counts,
            entry: 0,
            conversion: 0,
            pointer: 0,
            polls_left: 0,
            converting: false,
            ready: false,
            latest_counts: 0,
        }
    }

    fn start_conversion(&mut self) {
        // Each logged reading is served as SPREAD_COUNTS.len() conversions.
        if self.conversion == SPREAD_COUNTS.len() {
            self.entry += 1;
            self.conversion = 0;
        }
        let mean = self.counts.get(self.entry).copied().unwrap_or(0);
        let spread = SPREAD_COUNTS[self.conversion];
        // A clipped reading stays clipped; others spread around the mean.
        self.latest_counts = if mean >= FULL_SCALE_COUNTS {
            FULL_SCALE_COUNTS
        } else {
            mean.saturating_add_signed(spread).min(FULL_SCALE_COUNTS)
        };
        self.conversion += 1;
        self.converting = true;
        self.ready = false;
        self.polls_left = POLLS_UNTIL_READY;
    }

    fn read_register(&mut self, buffer: &mut [u8]) {
        for byte in buffer.iter_mut() {
            *byte = match self.pointer {
                register::ID => DEVICE_ID,
                register::STATUS => {
                    if self.converting {
                        if self.polls_left == 0 {
                            self.converting = false;
                            self.ready = true;
                        } else {
                            self.polls_left -= 1;
                        }
                    }
                    let clipped = self.ready && self.latest_counts >= FULL_SCALE_COUNTS;
                    u8::from(self.ready) * status::READY + u8::from(clipped) * status::OVERRANGE
                }
                register::COUNTS => {
                    self.ready = false;
                    self.latest_counts.to_be_bytes()[1]
                }
                0x05 => self.latest_counts.to_be_bytes()[2],
                0x06 => self.latest_counts.to_be_bytes()[3],
                _ => 0,
            };
            self.pointer = self.pointer.wrapping_add(1);
        }
    }

    fn write_register(&mut self, bytes: &[u8]) {
        let Some((&reg, values)) = bytes.split_first() else {
            return;
        };
        self.pointer = reg;
        if reg == register::CONTROL && values.first().is_some_and(|v| v & control::START != 0) {
            self.start_conversion();
        }
    }
}

impl i2c::ErrorType for ReplayFrontEnd<'_> {
    type Error = ErrorKind;
}

impl I2c for ReplayFrontEnd<'_> {
    fn transaction(
        &mut self,
        address: u8,
        operations: &mut [Operation<'_>],
    ) -> Result<(), Self::Error> {
        if address != self.address {
            return Err(ErrorKind::NoAcknowledge(i2c::NoAcknowledgeSource::Address));
        }
        for op in operations {
            match op {
                Operation::Write(bytes) => self.write_register(bytes),
                Operation::Read(buffer) => self.read_register(buffer),
            }
        }
        Ok(())
    }
}

/// A delay that only adds up the time asked for: QEMU's clock is not the
/// point here, and the instruction counts should not include busy-waiting.
#[derive(Default)]
pub struct VirtualDelay {
    /// Total delay requested, nanoseconds.
    pub elapsed_ns: u64,
}

impl DelayNs for VirtualDelay {
    fn delay_ns(&mut self, ns: u32) {
        self.elapsed_ns += u64::from(ns);
    }
}
