//! Size probe: parse a blob and run one int8 inference from `u8` features with `Model::infer`
//! (scores, softmax).
#![no_std]
#![no_main]

use kinglet_runtime::{Input, Model};

kinglet_size_probe::probe!(|blob, features, scratch| {
    let mut scores = [0f32; 4];
    if let Ok(m) = Model::parse(blob) {
        black_box(m.infer(Input::U8(black_box(&features)), &mut scratch, &mut scores)).ok();
    }
});
