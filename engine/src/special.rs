//! TODO-special
