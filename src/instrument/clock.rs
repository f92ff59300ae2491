//! Time and cancellation, handed in by the caller.
//!
//! The sequencer never reads a global clock: it asks the [`Clock`] it was given, so host
//! replay, tests and the simulator drive exactly the code the device runs. Between any two
//! reads it asks a [`Cancel`] whether to stop.

use core::sync::atomic::{AtomicBool, Ordering};

/// A millisecond time base (any origin; wraps after about 49 days, differences are taken
/// with wrapping arithmetic).
pub trait Clock {
    /// Milliseconds since an arbitrary origin.
    fn now_ms(&mut self) -> u32;
}

impl<T: Clock + ?Sized> Clock for &mut T {
    fn now_ms(&mut self) -> u32 {
        T::now_ms(self)
    }
}

/// A [`Clock`] over a function (a timer peripheral read, a host clock).
#[derive(Clone, Copy, Debug)]
pub struct FnClock<F>(pub F);

impl<F: FnMut() -> u32> Clock for FnClock<F> {
    fn now_ms(&mut self) -> u32 {
        (self.0)()
    }
}

/// Asked between reads whether the running procedure should stop.
pub trait Cancel {
    /// Whether to stop now.
    fn is_cancelled(&mut self) -> bool;
}

/// Never cancels.
#[derive(Clone, Copy, Debug, Default)]
pub struct NeverCancel;

impl Cancel for NeverCancel {
    fn is_cancelled(&mut self) -> bool {
        false
    }
}

/// A flag set from elsewhere (an interrupt handler, another task).
impl Cancel for &AtomicBool {
    fn is_cancelled(&mut self) -> bool {
        self.load(Ordering::Relaxed)
    }
}

/// A [`Cancel`] over a function (a button poll, a test's countdown).
#[derive(Clone, Copy, Debug)]
pub struct FnCancel<F>(pub F);

impl<F: FnMut() -> bool> Cancel for FnCancel<F> {
    fn is_cancelled(&mut self) -> bool {
        (self.0)()
    }
}
