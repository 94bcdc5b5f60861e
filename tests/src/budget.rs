//! f64 reference: line-item link budget.
