//! The keyboard-driven review page: walk through candidates, look at each figure and
//! its numbers, and record a label with one key straight into the label history.

mod catalogue_store;
mod server;
pub mod store;

pub use catalogue_store::CatalogueStore;
pub use server::ReviewServer;
pub use store::{LabelStore, MemoryStore, ReviewItem, ReviewLabel};
