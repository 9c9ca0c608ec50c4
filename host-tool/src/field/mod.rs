//! The field log: what a field logger kept in its flash, read back into the live link's
//! CSV files.
//!
//! ```text
//! flash image file (or log_link: the image read over a device's link with ReadLog)
//!   -> flash_image: geometry, a read-only NorFlash over the bytes
//!   -> the core's Logbook: records, oldest first (each a wire frame)
//!   -> logbook: shared::session -> windows.csv, ... (the same files `watch` writes)
//! ```
pub mod flash_image;
pub mod log_link;
pub mod logbook;
