//! Acceptance tests live in `tests/`; this library holds only the checks of the project's own
//! documentation (`docs`): every `docs/*.md` citation resolves, and docs/constants.md matches
//! the model's constants table; and the house rule on function length (`house`).

#[cfg(test)]
mod docs;
#[cfg(test)]
mod house;
