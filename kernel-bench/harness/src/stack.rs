//! Stack depth of each call the stack probe (`kernel-bench/fw/src/bin/stack.rs`) measures, by
//! two rules: what the paint found, and the lowest stack pointer a QEMU register trace saw
//! between the call's markers. The published figure is the deeper of the two.
//!
//! The trace is QEMU's own `-d cpu,nochain` log with `-singlestep`: one register dump before
//! every executed instruction (`R13` is the stack pointer, `R15` the PC). The plugin API of
//! QEMU 7.2 cannot read registers (that came with QEMU 8.2/9), and a store-address trace is
//! what the paint already sees, so the register log is the one exact source of the stack
//! pointer on this QEMU.
use std::collections::HashSet;
use std::io::BufRead;

/// One measured call.
#[derive(Clone, Debug, PartialEq)]
pub struct Call {
    /// Model (`digits`, `vibration`, `digits-f32`).
    pub model: String,
    /// Call (`parse`, `infer-f32`, `infer-u8`, `infer-i16`, `classify-i16`).
    pub call: String,
    /// Bytes the paint found used.
    pub painted: u64,
    /// Bytes from the stack pointer at the call down to the lowest stack pointer inside it.
    pub lowest_sp: u64,
}

impl Call {
    /// The published figure: the deeper of the two rules.
    pub fn bytes(&self) -> u64 {
        self.painted.max(self.lowest_sp)
    }

    /// Whether this is an inference (`infer` or `classify`), not `parse`.
    pub fn is_inference(&self) -> bool {
        self.call != "parse"
    }
}

/// The probe's results on one target.
#[derive(Debug)]
pub struct Probe {
    /// `size_of::<Model>()` on the target.
    pub model_struct: u64,
    /// Every call, in order.
    pub calls: Vec<Call>,
}

impl Probe {
    /// The deepest `parse`.
    pub fn parse(&self) -> u64 {
        self.calls
            .iter()
            .filter(|c| !c.is_inference())
            .map(Call::bytes)
            .max()
            .unwrap_or(0)
    }

    /// The deepest inference of `model`, or of every model when `None`.
    pub fn inference(&self, model: Option<&str>) -> u64 {
        self.calls
            .iter()
            .filter(|c| c.is_inference() && model.is_none_or(|m| c.model == m))
            .map(Call::bytes)
            .max()
            .unwrap_or(0)
    }

    /// The deepest `classify` (the integer-only call), of every model.
    pub fn classify(&self) -> u64 {
        self.calls
            .iter()
            .filter(|c| c.call.starts_with("classify"))
            .map(Call::bytes)
            .max()
            .unwrap_or(0)
    }

    /// The call `model`/`call`.
    pub fn get(&self, model: &str, call: &str) -> Option<&Call> {
        self.calls
            .iter()
            .find(|c| c.model == model && c.call == call)
    }
}

/// One marked section of the trace.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Window {
    /// Stack pointer at the start marker.
    pub sp: u64,
    /// Lowest stack pointer from the start marker to the stop marker.
    pub lowest: u64,
}

fn hex_after(line: &str, key: &str) -> Option<u64> {
    let at = line.find(key)? + key.len();
    u64::from_str_radix(line.get(at..at + 8)?, 16).ok()
}

/// The marked sections of a register trace, in order. `starts` and `stops` are the marker
/// addresses.
pub fn windows(
    trace: impl BufRead,
    starts: &HashSet<u64>,
    stops: &HashSet<u64>,
) -> Result<Vec<Window>, String> {
    let mut out = Vec::new();
    let mut open: Option<Window> = None;
    for line in trace.lines() {
        let line = line.map_err(|e| format!("reading the trace: {e}"))?;
        let (Some(sp), Some(pc)) = (hex_after(&line, "R13="), hex_after(&line, "R15=")) else {
            continue;
        };
        if let Some(w) = open.as_mut() {
            w.lowest = w.lowest.min(sp);
        }
        if starts.contains(&pc) {
            if open.is_some() {
                return Err(format!("trace: a start marker at {pc:#x} inside a section"));
            }
            open = Some(Window { sp, lowest: sp });
        } else if stops.contains(&pc) {
            out.push(
                open.take()
                    .ok_or(format!("trace: a stop marker at {pc:#x} outside a section"))?,
            );
        }
    }
    if open.is_some() {
        return Err("trace: the last section was not closed".into());
    }
    Ok(out)
}

/// Pairs the probe's `kb` lines with the trace's sections, in order.
pub fn pair(what: &str, log: &str, windows: &[Window]) -> Result<Probe, String> {
    let mut probe = Probe {
        model_struct: 0,
        calls: vec![],
    };
    let mut next = windows.iter();
    let mut ended = false;
    let bad = |line: &str| format!("{what}: {line}");
    for line in log.lines() {
        let f: Vec<&str> = line.split_whitespace().collect();
        match f[..] {
            ["kb", "model_struct", n] => probe.model_struct = n.parse().map_err(|_| bad(line))?,
            ["kb", "stack", model, call, painted, sp] => {
                let w = next
                    .next()
                    .ok_or(format!("{what}: more calls than traced sections"))?;
                let sp: u64 = sp.parse().map_err(|_| bad(line))?;
                if sp != w.sp {
                    return Err(format!(
                        "{what}: {model} {call}: the probe read the stack pointer {sp:#x}, the trace has {:#x} at the marker",
                        w.sp
                    ));
                }
                probe.calls.push(Call {
                    model: model.into(),
                    call: call.into(),
                    painted: painted.parse().map_err(|_| bad(line))?,
                    lowest_sp: w.sp - w.lowest,
                });
            }
            ["kb", "end"] => ended = true,
            ["kb", "panic", ..] => return Err(format!("{what}: firmware panicked: {line}")),
            _ => {}
        }
    }
    if !ended {
        return Err(format!("{what}: the probe did not finish (no `kb end`)"));
    }
    if next.next().is_some() {
        return Err(format!("{what}: more traced sections than calls"));
    }
    Ok(probe)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dump(sp: u64, pc: u64) -> String {
        format!(
            "R00=00000000 R01=00000000 R02=00000000 R03=00000000\nR12=00000000 R13={sp:08x} R14=00000000 R15={pc:08x}\nXPSR=01000000 ---- T priv-thread\n"
        )
    }

    #[test]
    fn the_lowest_stack_pointer_of_each_section() {
        // Before, a section that goes 40 bytes down (a frame reserved and never written), one
        // that goes 8 down, and instructions after.
        let steps = [
            (0x2000_1000, 0x100),
            (0x2000_0ff0, 0x200), // start
            (0x2000_0fe0, 0x202),
            (0x2000_0fc8, 0x204),
            (0x2000_0ff0, 0x206), // stop
            (0x2000_0ff0, 0x300), // start
            (0x2000_0fe8, 0x302),
            (0x2000_0ff0, 0x304), // stop
            (0x2000_0f00, 0x400),
        ];
        let trace: String = steps.iter().map(|&(sp, pc)| dump(sp, pc)).collect();
        let starts = HashSet::from([0x200, 0x300]);
        let stops = HashSet::from([0x206, 0x304]);
        let w = windows(trace.as_bytes(), &starts, &stops).unwrap();
        assert_eq!(
            w,
            [
                Window {
                    sp: 0x2000_0ff0,
                    lowest: 0x2000_0fc8
                },
                Window {
                    sp: 0x2000_0ff0,
                    lowest: 0x2000_0fe8
                },
            ]
        );
        let log = format!(
            "kb model_struct 560\nkb stack d parse 32 {sp}\nkb stack d infer-f32 12 {sp}\nkb end\n",
            sp = 0x2000_0ff0
        );
        let p = pair("t", &log, &w).unwrap();
        // The deeper rule wins: 40 from the trace over 32 painted, 12 painted over 8.
        assert_eq!(
            (p.parse(), p.inference(None), p.model_struct),
            (40, 12, 560)
        );
    }

    #[test]
    fn sections_must_balance_and_match_the_probe() {
        let starts = HashSet::from([0x200]);
        let stops = HashSet::from([0x206]);
        let unclosed = dump(0x2000_0ff0, 0x200);
        assert!(windows(unclosed.as_bytes(), &starts, &stops).is_err());
        let w = [Window {
            sp: 0x100,
            lowest: 0xf0,
        }];
        let wrong_sp = "kb stack d parse 8 4096\nkb end\n";
        assert!(pair("t", wrong_sp, &w)
            .unwrap_err()
            .contains("stack pointer"));
        assert!(pair("t", "kb end\n", &w)
            .unwrap_err()
            .contains("more traced"));
    }
}
