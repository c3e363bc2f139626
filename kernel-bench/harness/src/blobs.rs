//! Synthetic blobs and output-major twins, written with the runtime's own encoder.
use kinglet_runtime::dense::layout;
use kinglet_runtime::format::{
    Activation, InputQuantDesc, LayerDesc, LayerQuantDesc, ModelDesc, OutputKind, Precision,
    WeightLayout,
};
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

fn encode(desc: &ModelDesc<'_>) -> Result<Vec<u8>, String> {
    let mut out = vec![0u8; kinglet_runtime::encode::max_encoded_len(desc)];
    let n = kinglet_runtime::encode::encode(desc, &mut out).map_err(|e| e.to_string())?;
    out.truncate(n);
    Ok(out)
}

/// Encodes with `build(fields)`, where `fields[k]` is layer k's weight field: the blocked data
/// behind the alignment bytes `wanted_pads` asks for, re-encoding until they settle.
fn encode_aligned(
    data: &[Vec<u8>],
    build: impl Fn(&[Vec<u8>]) -> Result<Vec<u8>, String>,
) -> Result<Vec<u8>, String> {
    let mut pads = vec![0usize; data.len()];
    for _ in 0..16 {
        let fields: Vec<Vec<u8>> = data
            .iter()
            .zip(&pads)
            .map(|(d, &p)| [vec![0u8; p], d.clone()].concat())
            .collect();
        let blob = build(&fields)?;
        let wanted: Vec<usize> = {
            let model = Model::parse(&blob).map_err(|e| e.to_string())?;
            layout::wanted_pads(&model, &blob)
                .iter()
                .take(data.len())
                .map(|p| p.unwrap_or(0))
                .collect()
        };
        if wanted == pads {
            return Ok(blob);
        }
        pads = wanted;
    }
    Err("alignment did not settle".into())
}

fn i32s(v: impl IntoIterator<Item = i32>) -> Vec<u8> {
    v.into_iter().flat_map(i32::to_le_bytes).collect()
}
fn f32s(v: impl IntoIterator<Item = f32>) -> Vec<u8> {
    v.into_iter().flat_map(f32::to_le_bytes).collect()
}

/// One int8 layer `n → m`: blocked blob and output-major twin.
fn int8_layer(n: usize, m: usize, rng: &mut Rng) -> Result<(Vec<u8>, Vec<u8>), String> {
    let w: Vec<i8> = (0..n * m)
        .map(|_| ((rng.next() % 255) as i32 - 127) as i8)
        .collect();
    let bias = i32s((0..m).map(|_| (rng.next() % 8193) as i32 - 4096));
    let mult = i32s((0..m).map(|_| (1 << 30) + (rng.next() & 0x3FFF_FFFF) as i32));
    // About ±64 at the output: accumulators have a spread of √n · 73 · 73.
    let spread = (n as f64).sqrt() * 73.0 * 73.0 / 64.0;
    let shift = vec![(spread.log2().ceil() as i32 - 1).clamp(0, 31) as u8; m];
    let wscale = f32s(vec![0.01; m]);
    let (im, ia, is) = (i32s([64]), 0i64.to_le_bytes().to_vec(), vec![0u8]);
    let desc = |layout: WeightLayout, weights: &[u8]| {
        let mut layers = heapless::Vec::new();
        let _ = layers.push(LayerDesc {
            inputs: n as u32,
            outputs: m as u32,
            activation: Activation::Linear,
            layout,
            weights,
            bias: &bias,
            quant: Some(LayerQuantDesc {
                weight_scale: &wscale,
                multiplier: &mult,
                shift: &shift,
                output_scale: 0.1,
                output_zero_point: 0,
            }),
        });
        let d = ModelDesc {
            input_len: n as u32,
            precision: Precision::Int8,
            scaler: None,
            input_quant: Some(InputQuantDesc {
                scale: 1.0 / 64.0,
                zero_point: 0,
                int_mult: &im,
                int_add: &ia,
                int_shift: &is,
            }),
            layers,
            output: OutputKind::Logits,
            labels: "",
        };
        encode(&d)
    };
    let om: Vec<u8> = w.iter().map(|&v| v as u8).collect();
    let mut data = vec![0u8; layout::elements(n, m)];
    layout::block_i8(n, m, &w, &mut data);
    let blocked = encode_aligned(&[data], |f| desc(WeightLayout::Blocked4x4, &f[0]))?;
    Ok((blocked, desc(WeightLayout::OutputMajor, &om)?))
}

/// One f32 layer `n → m`: blocked blob and output-major twin.
fn f32_layer(n: usize, m: usize, rng: &mut Rng) -> Result<(Vec<u8>, Vec<u8>), String> {
    let k = 1.0 / (n as f32).sqrt();
    let w: Vec<f32> = (0..n * m).map(|_| rng.unit() * k).collect();
    let bias = f32s((0..m).map(|_| rng.unit() * 0.1));
    let desc = |layout: WeightLayout, weights: &[u8]| {
        let mut layers = heapless::Vec::new();
        let _ = layers.push(LayerDesc {
            inputs: n as u32,
            outputs: m as u32,
            activation: Activation::Linear,
            layout,
            weights,
            bias: &bias,
            quant: None,
        });
        encode(&ModelDesc {
            input_len: n as u32,
            precision: Precision::F32,
            scaler: None,
            input_quant: None,
            layers,
            output: OutputKind::Logits,
            labels: "",
        })
    };
    let mut data = vec![0u8; 4 * layout::elements(n, m)];
    layout::block_f32(n, m, &w, &mut data);
    let blocked = encode_aligned(&[data], |f| desc(WeightLayout::Blocked4x4, &f[0]))?;
    Ok((
        blocked,
        desc(WeightLayout::OutputMajor, &f32s(w.iter().copied()))?,
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
    for (n, m) in [(784, 100), (64, 32)] {
        let (b, o) = int8_layer(n, m, &mut rng)?;
        write(dir, &format!("i8_{n}x{m}.kgl"), &b)?;
        write(dir, &format!("i8_{n}x{m}.om.kgl"), &o)?;
        let (b, o) = f32_layer(n, m, &mut rng)?;
        write(dir, &format!("f32_{n}x{m}.kgl"), &b)?;
        write(dir, &format!("f32_{n}x{m}.om.kgl"), &o)?;
    }
    Ok(())
}

/// The output-major twin of a blob: same model, every layer `OutputMajor`.
pub fn twin(blob: &[u8]) -> Result<Vec<u8>, String> {
    let model = Model::parse(blob).map_err(|e| e.to_string())?;
    let elem = model.precision().activation_bytes();
    let mut fields = Vec::new();
    for l in &model.desc().layers {
        let (n, m) = (l.inputs as usize, l.outputs as usize);
        fields.push(match l.layout {
            WeightLayout::OutputMajor => l.weights.to_vec(),
            WeightLayout::Blocked4x4 => {
                let (_, data) = layout::split(l.weights, n, m, elem).ok_or("bad blocked field")?;
                let mut om = Vec::with_capacity(n * m * elem);
                for o in 0..m {
                    for i in 0..n {
                        let at = layout::index(o, i, n) * elem;
                        let e = &data[at..at + elem];
                        if elem == 1 {
                            om.push(layout::decode_i8(e[0]) as u8);
                        } else {
                            om.extend_from_slice(e);
                        }
                    }
                }
                om
            }
        });
    }
    let mut desc = model.desc().clone();
    for (l, f) in desc.layers.iter_mut().zip(&fields) {
        l.layout = WeightLayout::OutputMajor;
        l.weights = f;
    }
    encode(&desc)
}

/// [`twin`] from file to file.
pub fn twin_file(input: &str, output: &str) -> Result<(), String> {
    let blob = std::fs::read(input).map_err(|e| format!("{input}: {e}"))?;
    let t = twin(&blob).map_err(|e| format!("{input}: {e}"))?;
    std::fs::write(output, t).map_err(|e| format!("{output}: {e}"))
}
