//! (module sweep: work in progress, see DEVELOPERS.md)
