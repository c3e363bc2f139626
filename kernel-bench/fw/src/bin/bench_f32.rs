//! Whole inference of the f32 twins of the two example models and each of their layers alone,
//! counted like the benchmark's cases: what the f32 rates of `kinglet inspect`
//! (`converter/src/report/cycles.rs`) are fitted to. The harness runs it on the FPU target.
//!
//! A firmware of its own, not more cases in `bench`: with them there, fat LTO compiled
//! `Model::infer` differently and every Cortex-M4 `infer` count of `bench` grew by 15
//! instructions. So the few helpers below repeat `bench`'s.
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use kinglet_firmware_bench::blobs::{self, Aligned};
use kinglet_firmware_bench::counted::{case, park};
use kinglet_firmware_bench::rng::Rng;
use kinglet_runtime::unstable::dense::{self, DenseF32};
use kinglet_runtime::unstable::wire::format::{Activation, WeightLayout};
use kinglet_runtime::{Input, Model};

#[panic_handler]
fn panic(info: &core::panic::PanicInfo<'_>) -> ! {
    hprintln!("kb panic {}", info);
    debug::exit(debug::EXIT_FAILURE);
    park()
}

/// `MODEL-L<k+1>` in `buf`.
fn layer_name<'b>(buf: &'b mut [u8; 24], model: &str, k: usize) -> &'b str {
    let m = model.as_bytes();
    let len = m.len().min(20);
    buf[..len].copy_from_slice(&m[..len]);
    buf[len..len + 3].copy_from_slice(b"-L1");
    buf[len + 2] = b'1' + k as u8;
    core::str::from_utf8(&buf[..len + 3]).unwrap_or("layer")
}

fn whole_f32(name: &str, blob: &'static [u8], rng: &mut Rng) {
    let m = match Model::parse(blob) {
        Ok(m) => m,
        Err(e) => panic!("{} rejected: {}", name, e),
    };
    let n = m.input_len();
    let mut features = [0f32; 784];
    for f in features[..n].iter_mut() {
        *f = (rng.next_u32() % 17) as f32 * if n == 64 { 1.0 } else { 0.25 };
    }
    let input = Input::F32(&features[..n]);
    let mut scratch = Aligned([0u8; 4096]);
    let mut scores = [0f32; 100];
    let macs: usize = m.layers().map(|l| l.macs()).sum();
    let mut pred = None;
    case(name, "model-kernel", macs, || {
        pred = Some(m.infer(black_box(input), &mut scratch.0, &mut scores));
    });
    assert!(pred.is_some_and(|p| p.is_ok()), "{} failed", name);
    for (k, l) in m.desc().layers.iter().enumerate() {
        let (src, dst) = scratch.0.split_at_mut(3584);
        let (inputs, outputs) = (l.inputs as usize, l.outputs as usize);
        for c in src[..4 * inputs].chunks_exact_mut(4) {
            c.copy_from_slice(&rng.f32().to_le_bytes());
        }
        let mut label = [0u8; 24];
        let text = layer_name(&mut label, name, k);
        case(text, "layer-kernel", inputs * outputs, || {
            let p = DenseF32 {
                inputs,
                weights: black_box(l.weights),
                bias: l.bias,
                relu: l.activation == Activation::Relu,
            };
            let (x, y) = (black_box(&src[..4 * inputs]), &mut dst[..4 * outputs]);
            match l.layout {
                WeightLayout::Blocked4x4 => dense::dense_f32_blocked_auto(&p, x, y),
                _ => dense::dense_f32(&p, x, y),
            }
        });
    }
}

#[entry]
fn main() -> ! {
    hprintln!("kb target {}", dense::KERNEL);
    case("empty", "empty", 0, || {});
    let mut rng = Rng::new(42);
    whole_f32("digits-f32", blobs::DIGITS_F32, &mut rng);
    whole_f32("vibration-f32", blobs::VIBRATION_F32, &mut rng);
    // The synthetic f32 layers as whole models (scaler, one layer, softmax), as in `bench`.
    #[cfg(kb_big_f32)]
    whole_f32("f32-784x100", blobs::F32_784X100, &mut rng);
    whole_f32("f32-64x32", blobs::F32_64X32, &mut rng);
    whole_f32("f32-18x40", blobs::F32_18X40, &mut rng);
    hprintln!("kb end");
    debug::exit(debug::EXIT_SUCCESS);
    park()
}
