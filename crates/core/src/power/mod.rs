//! The power budget (pure): the parts' supply data (`data`, the library's `supply.toml`), copper
//! wire by gauge (`copper`), the supply wiring of a design file (`wiring`), one part's current
//! (`current`) and the sections' rails as a fixed point (`solve`).

pub mod compare;
pub mod copper;
pub mod current;
pub mod data;
pub mod solve;
pub mod timing;
pub mod wiring;

pub use data::{Draw, DrawKind, SupplyData};
pub use solve::{PowerBudget, PowerPoint, SectionPower, clock_fixed_point, solve};
pub use wiring::Wiring;
