//! Size probe baseline: the skeleton without the runtime (the blob only kept alive).
#![no_std]
#![no_main]

kinglet_size_probe::probe!(|blob, features, scratch| {
    black_box(blob);
});
