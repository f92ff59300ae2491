//! Event logging of the sequencer through defmt (feature `defmt`). Without the feature the
//! macro expands to nothing, so no formatting code is linked.

/// Logs a sequencer event at debug level through defmt; nothing without the `defmt` feature.
macro_rules! event {
    ($($arg:tt)*) => {
        #[cfg(feature = "defmt")]
        {
            defmt::debug!($($arg)*);
        }
    };
}

pub(crate) use event;
