//! Size probe: parse a blob and get the class of one inference from `u8` features with
//! `Model::classify` (integer arithmetic only).
#![no_std]
#![no_main]

use kinglet_runtime::{Input, Model};

kinglet_size_probe::probe!(|blob, features, scratch| {
    if let Ok(m) = Model::parse(blob) {
        black_box(m.classify(Input::U8(black_box(&features)), &mut scratch)).ok();
    }
});
