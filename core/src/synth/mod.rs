//! Synthetic devices with known truth (being written).
