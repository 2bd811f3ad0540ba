//! Size builds: the two-axis tick called once, so that the `.text` it adds can be read
//! as (this build) - (the build without features). The settings, state and inputs pass
//! through `black_box`, so the compiler cannot specialise the tick for them.

use core::hint::black_box;

/// Calls the tick once with inputs the optimiser cannot see.
pub fn once() {
    let (l, r) = black_box((1000u16, 2000u16));
    #[cfg(feature = "size-tick")]
    {
        let mut st = ctrl_core::drive::DriveState::new();
        let d = black_box(&crate::rover::DRIVE);
        black_box(d.tick(black_box(&mut st), l, r));
    }
    #[cfg(feature = "size-tick-f32")]
    {
        let mut st = ctrl_core::float::DriveState::new(crate::rover::LOW_VOLTS as f32);
        let d = black_box(&crate::rover::DRIVE_F32);
        black_box(d.tick(black_box(&mut st), l, r));
    }
    let _ = (l, r);
}
