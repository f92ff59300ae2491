//! The `--plot` SVG (being written).

use lumisorb::session::Metadata;

use crate::HostReplay;

/// Writes the calibration plot of every channel to `path`.
pub fn write_svg(_path: &str, _meta: &Metadata, _r: &HostReplay) -> Result<(), String> {
    Err("plot not written yet".into())
}
