//! TODO-budget
