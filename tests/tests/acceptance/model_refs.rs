//! Acceptance checks: model_refs (filled in by the work on this area).
