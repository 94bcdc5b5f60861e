//! Reading and writing field logs (CSV and framed binary), streaming.
