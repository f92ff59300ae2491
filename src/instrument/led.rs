//! The LED: on and off through an [`OutputPin`](embedded_hal::digital::OutputPin), and its
//! drive level through [`SetDutyCycle`] where the hardware can
//! dim it (PWM or a current DAC behind that trait).
//!
//! Without dimming hardware pass [`FixedDrive`]: a duty-cycle "channel" with a single level,
//! so auto-exposure then only uses the detector's exposure steps.

use core::convert::Infallible;

use embedded_hal::pwm::{ErrorType, SetDutyCycle};

/// A drive "channel" for an LED that cannot be dimmed: maximum duty 1, setting it does nothing.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedDrive;

impl ErrorType for FixedDrive {
    type Error = Infallible;
}

impl SetDutyCycle for FixedDrive {
    fn max_duty_cycle(&self) -> u16 {
        1
    }

    fn set_duty_cycle(&mut self, _duty: u16) -> Result<(), Infallible> {
        Ok(())
    }
}
