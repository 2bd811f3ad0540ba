//! (module emit: work in progress, see DEVELOPERS.md)
