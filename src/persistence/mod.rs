//! Persistence: calibrations, method settings and a result log kept in NOR flash, surviving
//! power loss.
//!
//! (Overview, capacity rules and budgets: filled in as the layer lands.)

mod blocking;
mod calibration_record;
mod codec;
mod method_record;
mod mock_flash;
pub mod record;
mod result_log;
mod session_export;
mod staleness;
mod store;

pub use blocking::{block_on, BlockingFlash};
pub use calibration_record::{
    CalibrationRecord, MAX_STANDARDS, REFIT_TOLERANCE_F32, REFIT_TOLERANCE_F64,
};
pub use method_record::{MethodId, MethodSettings};
pub use mock_flash::{MockFlash, MockFlashError};
pub use record::{DecodeError, EncodeError, RecordKind};
pub use result_log::{
    export_csv, for_each_entry, write_csv_header, write_csv_row, ConcentrationInterval,
    ExportError, ExportSummary, ResultEntry, SampleId, SampleIdError, CSV_HEADER,
};
pub use session_export::{
    export_session, write_result_comment, SessionExportError, RESULT_COMMENT, RESULT_FLAGS_COMMENT,
};
pub use staleness::Staleness;
pub use store::{
    Encode, FlashStore, LayoutError, LoadError, RecordKey, RecordMap, RecordRing, StoreError,
    StoreLayout, KEY_LEN, MAX_RECORD_LEN, SCRATCH_LEN,
};
