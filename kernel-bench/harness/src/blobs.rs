//! Synthetic blobs and output-major twins, written as the packer writes blobs: owned layer
//! tables of `kinglet-builder`, through the runtime's own geometry and validating encoder.
use kinglet_builder::{
    Activation, OutputKind, OwnedInput, OwnedLayer, OwnedModel, OwnedQuant, Precision, WeightLayout,
};
use kinglet_runtime::unstable::wire::format::InputWidth;
use kinglet_runtime::Model;

/// xorshift32 (Marsaglia, 2003), as in the firmware.
struct Rng(u32);
impl Rng {
    fn next(&mut self) -> u32 {
        let mut x = self.0;
        x ^= x << 13;
        x ^= x >> 17;
        x ^= x << 5;
        self.0 = x;
        x
    }
    fn unit(&mut self) -> f32 {
        (self.next() >> 8) as f32 / (1u32 << 24) as f32 * 2.0 - 1.0
    }
}

/// A per-feature scaler of `n` maps `x − 0.25` (offset 0.25, scale 1), little-endian `f32`:
/// the synthetic layers are also run as whole models, which like the examples' scale every
/// feature and end in a softmax (the whole-model counts the estimate of `kinglet inspect` is
/// fitted to).
fn scaler(n: usize) -> (Vec<u8>, Vec<u8>) {
    let bytes = |v: f32| {
        (0..n)
            .flat_map(move |_| v.to_le_bytes())
            .collect::<Vec<u8>>()
    };
    (bytes(0.25), bytes(1.0))
}

/// The integer input path of that scaler and an input scale of 1/64 (zero point 0), per
/// feature as the packer writes it for a per-feature scaler: `q = round(64 x − 16)` as
/// `(x · 64·2^16 − 16·2^16 + 2^15) >> 16`.
fn int_path(n: usize) -> OwnedInput {
    OwnedInput::new(
        1.0 / 64.0,
        0,
        &vec![64 << 16; n],
        &vec![-16 << 16; n],
        &vec![16; n],
    )
}

/// The blobs of one int8 layer `n → m`: blocked and output-major twin.
type Pair = (Vec<u8>, Vec<u8>);

/// One int8 layer `n → m`: the blobs with a per-feature scaler and integer input path (as the
/// packer writes a model with a per-feature scaler: what the whole-model cases run) and, with
/// the same weights, with a uniform one (a few bytes instead of 14 per feature: what the
/// 784-wide layer cases run, which must fit the Cortex-M0's flash twice).
fn int8_layer(n: usize, m: usize, rng: &mut Rng) -> Result<(Pair, Pair), String> {
    // Inputs uniform over int8: a standard deviation of about 73.
    let (w, bias, quant) = random_int8_layer(n, m, 73.0, rng);
    let model = |features: usize| OwnedModel {
        input_len: n as u32,
        precision: Precision::Int8,
        scaler: Some(scaler(features)),
        input_quant: Some(int_path(features)),
        layers: vec![OwnedLayer::int8(
            n as u32,
            m as u32,
            Activation::Linear,
            &w,
            &bias,
            quant.clone(),
        )],
        output: OutputKind::Softmax,
        labels: String::new(),
    };
    Ok((both_layouts(&model(n))?, both_layouts(&model(1))?))
}

/// Random int8 weights (uniform in [-127, 127]), biases and multipliers of a layer `n → m`,
/// drawn in that order, with the shift that brings its outputs to about ±64 for inputs of
/// standard deviation `input_sd`: accumulators then spread by `√n · 73 · input_sd` (73 being
/// the weights' standard deviation).
fn random_int8_layer(
    n: usize,
    m: usize,
    input_sd: f64,
    rng: &mut Rng,
) -> (Vec<i8>, Vec<i32>, OwnedQuant) {
    let w: Vec<i8> = (0..n * m)
        .map(|_| ((rng.next() % 255) as i32 - 127) as i8)
        .collect();
    let bias: Vec<i32> = (0..m).map(|_| (rng.next() % 8193) as i32 - 4096).collect();
    let mult: Vec<i32> = (0..m)
        .map(|_| (1 << 30) + (rng.next() & 0x3FFF_FFFF) as i32)
        .collect();
    let spread = (n as f64).sqrt() * 73.0 * input_sd / 64.0;
    let shift = vec![(spread.log2().ceil() as i32 - 1).clamp(0, 31) as i8; m];
    (
        w,
        bias,
        OwnedQuant::new(&vec![0.01; m], &mult, &shift, 0.1, 0),
    )
}

/// One f32 layer `n → m`: blocked blob and output-major twin.
fn f32_layer(n: usize, m: usize, rng: &mut Rng) -> Result<(Vec<u8>, Vec<u8>), String> {
    let k = 1.0 / (n as f32).sqrt();
    let w: Vec<f32> = (0..n * m).map(|_| rng.unit() * k).collect();
    let bias: Vec<f32> = (0..m).map(|_| rng.unit() * 0.1).collect();
    let scaler = Some(scaler(n));
    let (n, m) = (n as u32, m as u32);
    let model = OwnedModel {
        input_len: n,
        precision: Precision::F32,
        scaler,
        input_quant: None,
        layers: vec![OwnedLayer::f32(n, m, Activation::Linear, &w, &bias)],
        output: OutputKind::Softmax,
        labels: String::new(),
    };
    both_layouts(&model)
}

/// `model` as the shipped `Blocked4x4` blob (data aligned, as the packer writes it) and as its
/// output-major twin.
fn both_layouts(model: &OwnedModel) -> Result<(Vec<u8>, Vec<u8>), String> {
    let blob = |layout| model.encode_in(layout).map_err(|e| e.to_string());
    Ok((
        blob(WeightLayout::Blocked4x4)?,
        blob(WeightLayout::OutputMajor)?,
    ))
}

fn write(dir: &str, name: &str, bytes: &[u8]) -> Result<(), String> {
    let p = std::path::Path::new(dir).join(name);
    std::fs::write(&p, bytes).map_err(|e| format!("{}: {e}", p.display()))
}

/// Writes the synthetic blobs into `dir`.
pub fn synth(dir: &str) -> Result<(), String> {
    std::fs::create_dir_all(dir).map_err(|e| format!("{dir}: {e}"))?;
    let mut rng = Rng(0x4B47_4C54);
    // 18 → 40 only runs whole (few features, many classes, a partial input group): a whole-model
    // count unlike the others for the estimate's fit, and one that fits the Cortex-M0.
    for (n, m) in [(784, 100), (64, 32), (18, 40)] {
        let ((b, o), (bu, ou)) = int8_layer(n, m, &mut rng)?;
        if n == 784 {
            // The layer cases run the compact blobs; the whole model (Cortex-M4) the full ones.
            write(dir, &format!("i8_{n}x{m}.kgl"), &bu)?;
            write(dir, &format!("i8_{n}x{m}.om.kgl"), &ou)?;
            write(dir, &format!("i8_{n}x{m}.whole.kgl"), &b)?;
            write(dir, &format!("i8_{n}x{m}.whole.om.kgl"), &o)?;
        } else {
            write(dir, &format!("i8_{n}x{m}.kgl"), &b)?;
            write(dir, &format!("i8_{n}x{m}.om.kgl"), &o)?;
        }
        let (b, o) = f32_layer(n, m, &mut rng)?;
        write(dir, &format!("f32_{n}x{m}.kgl"), &b)?;
        write(dir, &format!("f32_{n}x{m}.om.kgl"), &o)?;
    }
    // Its own generator, so the blobs above keep their bytes.
    write(
        dir,
        "i4_784x100.kgl",
        &int4_layer(784, 100, &mut Rng(0x4934_3834))?,
    )?;
    // The int16-input first layer (format version 7), its own generator as well.
    let mut rng = Rng(0x4931_3649);
    for (n, m) in [(784, 100), (64, 64)] {
        let (b, o) = int16_input_layer(n, m, &mut rng)?;
        write(dir, &format!("i16in_{n}x{m}.kgl"), &b)?;
        write(dir, &format!("i16in_{n}x{m}.om.kgl"), &o)?;
    }
    Ok(())
}

/// One int8 layer `n → m` of a model whose input tensor is int16 (format version 7, `FORMAT.md`
/// §3.6: symmetric, zero point 0), uniform scaler as the compact int8 layer blob: blocked blob
/// (what the packer writes) and output-major twin. Weights uniform in [-127, 127] as
/// [`int8_layer`] draws them; the format's bound `|bias| + 32768 · Σ|w| ≤ 2^31 − 1` holds with
/// room for 784 inputs (Σ|w| is about 784 · 64).
fn int16_input_layer(n: usize, m: usize, rng: &mut Rng) -> Result<Pair, String> {
    // Inputs uniform over int16: a standard deviation of 65,536 / √12 ≈ 18,918.
    let (w, bias, quant) = random_int8_layer(n, m, 18_918.0, rng);
    // The integer path of an input scale of 1/8192: `q = round(8192 x − 2048)`.
    let mut input = OwnedInput::new(1.0 / 8192.0, 0, &[8192 << 16], &[-2048 << 16], &[16]);
    input.width = InputWidth::I16;
    let model = OwnedModel {
        input_len: n as u32,
        precision: Precision::Int8,
        scaler: Some(scaler(1)),
        input_quant: Some(input),
        layers: vec![OwnedLayer::int8(
            n as u32,
            m as u32,
            Activation::Linear,
            &w,
            &bias,
            quant,
        )],
        output: OutputKind::Softmax,
        labels: String::new(),
    };
    both_layouts(&model)
}

/// One int4 layer `n → m` (`FORMAT.md` §3.5, uniform scaler as the compact int8 layer blob):
/// weights uniform in [-8, 7], the rest drawn as [`int8_layer`] draws it.
fn int4_layer(n: usize, m: usize, rng: &mut Rng) -> Result<Vec<u8>, String> {
    let w: Vec<i8> = (0..n * m)
        .map(|_| ((rng.next() % 16) as i32 - 8) as i8)
        .collect();
    let bias: Vec<i32> = (0..m).map(|_| (rng.next() % 8193) as i32 - 4096).collect();
    let mult: Vec<i32> = (0..m)
        .map(|_| (1 << 30) + (rng.next() & 0x3FFF_FFFF) as i32)
        .collect();
    // About ±64 at the output: accumulators have a spread of √n · 4.6 · 73.
    let spread = (n as f64).sqrt() * 4.6 * 73.0 / 64.0;
    let shift = vec![(spread.log2().ceil() as i32 - 1).clamp(0, 31) as i8; m];
    let quant = OwnedQuant::new(&vec![0.01; m], &mult, &shift, 0.1, 0);
    let model = OwnedModel {
        input_len: n as u32,
        precision: Precision::Int8,
        scaler: Some(scaler(1)),
        input_quant: Some(int_path(1)),
        layers: vec![OwnedLayer::int8(
            n as u32,
            m as u32,
            Activation::Linear,
            &w,
            &bias,
            quant,
        )],
        output: OutputKind::Softmax,
        labels: String::new(),
    };
    model
        .encode_in(WeightLayout::Nibble4x4)
        .map_err(|e| e.to_string())
}

/// The output-major twin of a blob: same model, every layer `OutputMajor`.
pub fn twin(blob: &[u8]) -> Result<Vec<u8>, String> {
    let model = Model::parse(blob).map_err(|e| e.to_string())?;
    OwnedModel::from_desc(model.desc())
        .encode_in(WeightLayout::OutputMajor)
        .map_err(|e| e.to_string())
}

/// [`twin`] from file to file.
pub fn twin_file(input: &str, output: &str) -> Result<(), String> {
    let blob = std::fs::read(input).map_err(|e| format!("{input}: {e}"))?;
    let t = twin(&blob).map_err(|e| format!("{input}: {e}"))?;
    std::fs::write(output, t).map_err(|e| format!("{output}: {e}"))
}
