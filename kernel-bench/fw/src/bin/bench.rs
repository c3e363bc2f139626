//! The benchmark firmware: self-check, then every counted case, printed over semihosting as
//! `kb ...` lines that the harness (`kernel-bench/harness/src/bench.rs`) pairs with the
//! plugin's counts (in order).
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use kinglet_firmware_bench::blobs::{self, Aligned};
use kinglet_firmware_bench::counted::{case, model, params, park};
use kinglet_firmware_bench::{naive, rng::Rng, selfcheck};
use kinglet_runtime::unstable::dense::{self, portable, DenseF32, DenseI8};
use kinglet_runtime::unstable::wire::format::{LayerDesc, WeightLayout};
use kinglet_runtime::Input;

#[panic_handler]
fn panic(info: &core::panic::PanicInfo<'_>) -> ! {
    hprintln!("kb panic {}", info);
    debug::exit(debug::EXIT_FAILURE);
    park()
}

/// The layer's kernel as the runtime picks it for its layout.
fn run_i8(l: &LayerDesc<'_>, x: &[u8], out: &mut [u8]) {
    let p = params(l);
    match l.layout {
        WeightLayout::Blocked4x4 => dense::dense_i8_blocked_auto(&p, x, out),
        WeightLayout::Nibble4x4 => dense::dense_i4_auto(&p, x, out),
        _ => dense::dense_i8(&p, x, out),
    }
}

fn fill(buf: &mut [u8], rng: &mut Rng) {
    for b in buf.iter_mut() {
        *b = rng.next_u32() as u8;
    }
}

fn fill_f32(buf: &mut [u8], rng: &mut Rng) {
    for c in buf.chunks_exact_mut(4) {
        c.copy_from_slice(&rng.f32().to_le_bytes());
    }
}

/// The int8 cases of one synthetic layer: naive, portable output-major, portable blocked, kernel,
/// and (Cortex-M4) the kernel on the same blob one byte past a 4-byte boundary.
// Not inlined: main would hold every case's buffers at once (the Cortex-M0 has 16 KiB).
#[inline(never)]
fn int8_layer(
    name: &str,
    blocked: &'static [u8],
    om: &'static [u8],
    unaligned: Option<&'static [u8]>,
    rng: &mut Rng,
) {
    let (mb, mo) = (model(blocked), model(om));
    let (lb, lo) = (mb.desc().layers[0], mo.desc().layers[0]);
    let (n, m) = (lb.inputs as usize, lb.outputs as usize);
    let mut x = [0u8; 784];
    let x = &mut x[..n];
    fill(x, rng);
    let mut out = [0u8; 100];
    let mut reference = [0u8; 100];
    let (pb, po) = (params(&lb), params(&lo));
    case(name, "naive", n * m, || {
        naive::dense_i8(black_box(&po), black_box(x), &mut reference[..m])
    });
    case(name, "portable", n * m, || {
        portable::dense_i8(black_box(&po), black_box(x), &mut out[..m])
    });
    assert!(out[..m] == reference[..m], "{} portable differs", name);
    case(name, "portable-blocked", n * m, || {
        portable::dense_i8_blocked_portable(black_box(&pb), black_box(x), &mut out[..m])
    });
    assert!(
        out[..m] == reference[..m],
        "{} portable-blocked differs",
        name
    );
    case(name, "kernel", n * m, || {
        dense::dense_i8_blocked_auto(black_box(&pb), black_box(x), &mut out[..m])
    });
    assert!(out[..m] == reference[..m], "{} kernel differs", name);
    if let Some(blob) = unaligned {
        let mu = model(blob);
        let pu = params(&mu.desc().layers[0]);
        out[..m].fill(0);
        case(name, "kernel-unaligned", n * m, || {
            dense::dense_i8_blocked_auto(black_box(&pu), black_box(x), &mut out[..m])
        });
        assert!(out[..m] == reference[..m], "{} unaligned differs", name);
    }
    black_box(&out);
}

/// The f32 cases of one synthetic layer: naive, portable output-major, kernel, and (Cortex-M4)
/// the kernel on the blob one byte past a 4-byte boundary.
// Not inlined: main would hold every case's buffers at once (the Cortex-M0 has 16 KiB).
#[inline(never)]
fn f32_layer(
    name: &str,
    blocked: &'static [u8],
    om: &'static [u8],
    unaligned: Option<&'static [u8]>,
    rng: &mut Rng,
) {
    let (mb, mo) = (model(blocked), model(om));
    let (lb, lo) = (mb.desc().layers[0], mo.desc().layers[0]);
    let (n, m) = (lb.inputs as usize, lb.outputs as usize);
    let mut x = Aligned([0u8; 4 * 784]);
    let x = &mut x.0[..4 * n];
    fill_f32(x, rng);
    let mut out = [0u8; 400];
    let mut reference = [0u8; 400];
    let relu = false;
    case(name, "naive", n * m, || {
        naive::dense_f32(
            n,
            black_box(lo.weights),
            lo.bias,
            relu,
            black_box(x),
            &mut reference[..4 * m],
        )
    });
    case(name, "portable", n * m, || {
        let p = DenseF32 {
            inputs: n,
            weights: black_box(lo.weights),
            bias: lo.bias,
            relu,
        };
        portable::dense_f32(&p, black_box(x), &mut out[..4 * m])
    });
    assert!(
        out[..4 * m] == reference[..4 * m],
        "{} portable differs",
        name
    );
    case(name, "kernel", n * m, || {
        let p = DenseF32 {
            inputs: n,
            weights: black_box(lb.weights),
            bias: lb.bias,
            relu,
        };
        dense::dense_f32_blocked_auto(&p, black_box(x), &mut out[..4 * m])
    });
    assert!(
        out[..4 * m] == reference[..4 * m],
        "{} kernel differs",
        name
    );
    if let Some(blob) = unaligned {
        let mu = model(blob);
        let lu = mu.desc().layers[0];
        out[..4 * m].fill(0);
        case(name, "kernel-unaligned", n * m, || {
            let p = DenseF32 {
                inputs: n,
                weights: black_box(lu.weights),
                bias: lu.bias,
                relu,
            };
            dense::dense_f32_blocked_auto(&p, black_box(x), &mut out[..4 * m])
        });
        assert!(
            out[..4 * m] == reference[..4 * m],
            "{} unaligned differs",
            name
        );
    }
}

/// The int8 layer of the activation-table cases (64 → 32, blocked).
const TABLE_LAYER: &[u8] = blobs::I8_64X32;

/// What a pointwise table adds to an int8 layer (tanh, sigmoid, ...: looked up as the kernel
/// stores each requantised value): the 64 → 32 layer on this build's kernel without a table
/// (`act-table`/`base`) and with one (`act-table`/`kernel`), each counted over its 32 outputs,
/// so the difference of the two rates is the table's cost per element. Both against the
/// reference: the plain layer's bytes looked up one by one.
#[inline(never)]
fn activation_table(rng: &mut Rng) {
    use kinglet_runtime::unstable::pointwise::TABLE_LEN;
    let m = model(TABLE_LAYER);
    let l = m.desc().layers[0];
    let (n, outs) = (l.inputs as usize, l.outputs as usize);
    let mut table = [0u8; TABLE_LEN];
    fill(&mut table, rng);
    let mut x = [0u8; 64];
    fill(&mut x[..n], rng);
    let mut plain = [0u8; 32];
    let mut looked = [0u8; 32];
    let base = DenseI8 {
        act_min: i8::MIN,
        act_max: i8::MAX,
        ..params(&l)
    };
    case("act-table", "base", outs, || {
        dense::dense_i8_blocked_auto(black_box(&base), black_box(&x[..n]), &mut plain[..outs])
    });
    let with = DenseI8 {
        table: Some(&table),
        ..base
    };
    case("act-table", "kernel", outs, || {
        dense::dense_i8_blocked_auto(black_box(&with), black_box(&x[..n]), &mut looked[..outs])
    });
    for (p, q) in plain.iter().zip(&looked).take(outs) {
        assert!(
            table[usize::from(*p ^ 0x80)] == *q,
            "activation table differs"
        );
    }
}

/// Whole inference of a packed model (blocked and its output-major twin; on the Cortex-M4 also
/// the blocked blob one byte past a 4-byte boundary) and each layer alone.
// Not inlined: main would hold every case's buffers at once (the Cortex-M0 has 16 KiB).
#[inline(never)]
fn whole_model(
    name: &str,
    blocked: &'static [u8],
    om: &'static [u8],
    unaligned: Option<&'static [u8]>,
    rng: &mut Rng,
) {
    let (mb, mo) = (model(blocked), model(om));
    let n = mb.input_len();
    let mut features = [0f32; MAX_INPUTS];
    for f in features[..n].iter_mut() {
        *f = (rng.next_u32() % 17) as f32 * if n == 64 { 1.0 } else { 0.25 };
    }
    let input = Input::F32(&features[..n]);
    let mut scratch = Aligned([0u8; MAX_SCRATCH]);
    let mut scores = [0f32; MAX_SCORES];
    let macs: usize = mb.layers().map(|l| l.macs()).sum();
    let mut pred = None;
    case(name, "model-portable", macs, || {
        pred = Some(mo.infer(black_box(input), &mut scratch.0, &mut scores));
    });
    let want = pred.take();
    case(name, "model-kernel", macs, || {
        pred = Some(mb.infer(black_box(input), &mut scratch.0, &mut scores));
    });
    assert!(
        pred == want && want.is_some_and(|p| p.is_ok()),
        "{} predictions differ",
        name
    );
    if let Some(blob) = unaligned {
        let mu = model(blob);
        case(name, "model-unaligned", macs, || {
            pred = Some(mu.infer(black_box(input), &mut scratch.0, &mut scores));
        });
        assert!(pred == want, "{} unaligned prediction differs", name);
    }
    // The integer input path (the same features as i16 counts): `infer`, and `classify`, which
    // stays in integers to the class.
    let mut counts = [0i16; MAX_INPUTS];
    for (c, f) in counts.iter_mut().zip(&features[..n]) {
        *c = *f as i16;
    }
    let ints = Input::I16(&counts[..n]);
    case(name, "model-infer-i16", macs, || {
        pred = Some(mb.infer(black_box(ints), &mut scratch.0, &mut scores));
    });
    let mut class = None;
    case(name, "model-classify-i16", macs, || {
        class = Some(mb.classify(black_box(ints), &mut scratch.0));
    });
    assert!(
        pred.is_some_and(|p| p.is_ok_and(|p| class == Some(Ok(p.class)))),
        "{} classify differs from infer",
        name
    );
    for (k, l) in mb.desc().layers.iter().enumerate() {
        let (src, dst) = scratch.0.split_at_mut(MAX_SCRATCH - 128);
        fill(&mut src[..l.inputs as usize], rng);
        let mut label = [0u8; 24];
        let text = layer_name(&mut label, name, k);
        case(text, "layer-kernel", l.macs_hint(), || {
            run_i8(
                black_box(l),
                black_box(&src[..l.inputs as usize]),
                &mut dst[..l.outputs as usize],
            )
        });
    }
}

trait Macs {
    fn macs_hint(&self) -> usize;
}
impl Macs for LayerDesc<'_> {
    fn macs_hint(&self) -> usize {
        self.inputs as usize * self.outputs as usize
    }
}

fn layer_name<'b>(buf: &'b mut [u8; 24], model: &str, k: usize) -> &'b str {
    let m = model.as_bytes();
    let len = m.len().min(20);
    buf[..len].copy_from_slice(&m[..len]);
    buf[len..len + 3].copy_from_slice(b"-L1");
    buf[len + 2] = b'1' + k as u8;
    core::str::from_utf8(&buf[..len + 3]).unwrap_or("layer")
}

/// The widest input, scratch buffer and score count of the whole-model cases: the 784 → 100 layer run
/// whole on the Cortex-M4, the 64-wide models on the M0 (16 KiB of RAM).
#[cfg(kb_big_models)]
const MAX_INPUTS: usize = 784;
#[cfg(kb_big_models)]
const MAX_SCRATCH: usize = 1024;
#[cfg(kb_big_models)]
const MAX_SCORES: usize = 100;
#[cfg(not(kb_big_models))]
const MAX_INPUTS: usize = 64;
#[cfg(not(kb_big_models))]
const MAX_SCRATCH: usize = 512;
#[cfg(not(kb_big_models))]
const MAX_SCORES: usize = 40;

/// `Some(blobs::$name)` on the Cortex-M4 (`kb_unaligned`: the unaligned twins exist there),
/// `None` elsewhere.
macro_rules! unaligned {
    ($name:ident) => {{
        #[cfg(kb_unaligned)]
        let blob = Some(blobs::$name);
        #[cfg(not(kb_unaligned))]
        let blob: Option<&'static [u8]> = None;
        blob
    }};
}

#[entry]
fn main() -> ! {
    hprintln!("kb target {}", dense::KERNEL);
    let cases = option_env!("KB_SELFCHECK_CASES")
        .and_then(|s| s.parse().ok())
        .unwrap_or(300);
    let t = selfcheck::run(cases, 0x5EED_1234);
    hprintln!("kb selfcheck {} {}", t.passed, t.failed);
    hprintln!("selfcheck: {} passed, {} failed", t.passed, t.failed);
    let mut rng = Rng::new(42);
    case("empty", "empty", 0, || {});
    int8_layer(
        "i8-784x100",
        blobs::I8_784X100,
        blobs::I8_784X100_OM,
        unaligned!(I8_784X100_UNALIGNED),
        &mut rng,
    );
    int8_layer(
        "i8-64x32",
        blobs::I8_64X32,
        blobs::I8_64X32_OM,
        unaligned!(I8_64X32_UNALIGNED),
        &mut rng,
    );
    #[cfg(kb_big_f32)]
    f32_layer(
        "f32-784x100",
        blobs::F32_784X100,
        blobs::F32_784X100_OM,
        unaligned!(F32_784X100_UNALIGNED),
        &mut rng,
    );
    f32_layer(
        "f32-64x32",
        blobs::F32_64X32,
        blobs::F32_64X32_OM,
        unaligned!(F32_64X32_UNALIGNED),
        &mut rng,
    );
    activation_table(&mut rng);
    whole_model(
        "digits",
        blobs::DIGITS,
        blobs::DIGITS_OM,
        unaligned!(DIGITS_UNALIGNED),
        &mut rng,
    );
    whole_model(
        "vibration",
        blobs::VIBRATION,
        blobs::VIBRATION_OM,
        unaligned!(VIBRATION_UNALIGNED),
        &mut rng,
    );
    // The synthetic layers as whole models (scaler, one layer, softmax): more whole-model
    // counts for the estimate of `kinglet inspect` to be fitted to and checked against.
    #[cfg(kb_big_models)]
    whole_model(
        "i8-784x100",
        blobs::I8_784X100_WHOLE,
        blobs::I8_784X100_WHOLE_OM,
        None,
        &mut rng,
    );
    whole_model(
        "i8-64x32",
        blobs::I8_64X32,
        blobs::I8_64X32_OM,
        None,
        &mut rng,
    );
    whole_model(
        "i8-18x40",
        blobs::I8_18X40,
        blobs::I8_18X40_OM,
        None,
        &mut rng,
    );
    hprintln!("kb end");
    debug::exit(if t.failed == 0 {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    park()
}
