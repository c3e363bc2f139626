//! What every benchmark firmware shares: a counted section, a blob parsed or the run stopped,
//! the int8 kernel parameters of a layer, and parking the core at the end.
use cortex_m_semihosting::hprintln;
use kinglet_runtime::unstable::dense::DenseI8;
use kinglet_runtime::unstable::requant::activation_range;
use kinglet_runtime::unstable::wire::format::LayerDesc;
use kinglet_runtime::Model;

/// Runs `f` as one counted section named `name` (`macs` multiply-accumulates): a `kb case`
/// line, then `f` between the markers the QEMU plugin counts between.
#[inline(never)]
pub fn case(name: &str, variant: &str, macs: usize, f: impl FnOnce()) {
    hprintln!("kb case {} {} {}", name, variant, macs);
    crate::marker::start();
    f();
    crate::marker::stop();
}

/// The parsed blob; a rejected one stops the run (the panic handler reports it).
pub fn model(blob: &'static [u8]) -> Model<'static> {
    match Model::parse(blob) {
        Ok(m) => m,
        Err(e) => panic!("blob rejected: {}", e),
    }
}

/// The int8 kernel parameters of layer `l` (no pointwise table).
pub fn params<'a>(l: &LayerDesc<'a>) -> DenseI8<'a> {
    let q = l.quant.expect("int8 layer");
    let (act_min, act_max) = activation_range(l.activation, q.output_zero_point);
    DenseI8 {
        inputs: l.inputs as usize,
        weights: l.weights,
        bias: l.bias,
        multiplier: q.multiplier,
        shift: q.shift,
        zero_point: q.output_zero_point,
        act_min,
        act_max,
        table: None,
    }
}

/// Without a debugger attached the exit call returns; park the core.
pub fn park() -> ! {
    loop {
        cortex_m::asm::wfi();
    }
}
