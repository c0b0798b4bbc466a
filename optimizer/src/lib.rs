//! Generic optimisers (see DEVELOPERS.md).
