//! What must hold after `Model::parse` accepted a blob: inference never panics, refuses bad
//! calls with the right typed error, and otherwise returns finite scores that are probabilities
//! when the output is softmax or sigmoid; `classify` refuses the same calls and picks infer's
//! class whenever infer's top score is unique.
use kinglet_runtime::{Input, Model, OutputKind, RunError};

/// Runs `input` through `model` with a scratch buffer of `scratch_len` bytes and `scores_len` scores, and
/// panics (a fuzz finding) when a rule is broken.
pub fn run_checked(model: &Model<'_>, input: Input<'_>, scratch_len: usize, scores_len: usize) {
    let mut scratch = vec![0u8; scratch_len];
    let mut scores = vec![f32::NAN; scores_len];
    let n_in = match input {
        Input::F32(v) => v.len(),
        Input::I16(v) => v.len(),
        Input::U8(v) => v.len(),
    };
    let nonfinite_at = match input {
        Input::F32(v) => v.iter().position(|x| !x.is_finite()),
        _ => None,
    };
    let mut stages = 0usize;
    let r = model.infer_traced(input, &mut scratch, &mut scores, &mut |s| {
        assert_eq!(s.index, stages, "stages come in order");
        stages += 1;
    });
    let out_len = model.output_len();
    check_classify(
        model,
        input,
        scratch_len,
        (n_in, nonfinite_at),
        &r,
        scores.get(..out_len).unwrap_or(&[]),
    );
    match r {
        Err(RunError::InputLength { expected, got }) => {
            assert_eq!(expected as usize, model.input_len());
            assert_eq!(got as usize, n_in);
            assert_ne!(n_in, model.input_len());
        }
        Err(RunError::ScoresTooSmall { needed, .. }) => {
            assert_eq!(needed as usize, out_len);
            assert!(scores_len < out_len);
        }
        Err(RunError::ScratchTooSmall { needed, .. }) => {
            assert_eq!(needed as usize, model.scratch_bytes());
            assert!(scratch_len < model.scratch_bytes());
        }
        Err(RunError::NonFiniteInput { index }) => {
            assert_eq!(Some(index as usize), nonfinite_at);
        }
        Err(RunError::NonFiniteOutput) => {
            assert_eq!(
                model.precision(),
                kinglet_runtime::Precision::F32,
                "only an f32 model may report a non-finite output"
            );
        }
        Err(RunError::NoIntegerInput) => {
            assert!(
                integer(input),
                "only integer features may be refused as such"
            );
            assert!(!model.takes_integer_input());
        }
        Err(e) => panic!("unexpected run error {e:?}"),
        Ok(p) => {
            assert!(!integer(input) || model.takes_integer_input());
            assert_eq!(n_in, model.input_len());
            assert!(nonfinite_at.is_none(), "non-finite input accepted");
            assert!(
                scratch_len >= model.scratch_bytes(),
                "short scratch buffer accepted"
            );
            assert_eq!(stages, model.layers().count() + 1, "one trace per tensor");
            let s = &scores[..out_len];
            assert!(
                s.iter().all(|v| v.is_finite()),
                "non-finite scores {s:?} from an accepted model"
            );
            assert!(
                p.class < model.classes(),
                "class {} of {}",
                p.class,
                model.classes()
            );
            assert!(p.score.is_finite());
            match model.desc().output {
                OutputKind::Softmax | OutputKind::OneVsRest => {
                    assert!(s.iter().all(|v| (0.0..=1.0).contains(v)), "{s:?}");
                    let sum: f32 = s.iter().sum();
                    assert!((sum - 1.0).abs() < 1e-3, "probabilities sum to {sum}");
                    assert_eq!(p.score, s[p.class]);
                    assert!(s.iter().all(|&v| v <= p.score));
                }
                OutputKind::Sigmoid => {
                    assert!((0.0..=1.0).contains(&s[0]), "{s:?}");
                    assert!((0.5..=1.0).contains(&p.score), "{p:?}");
                }
                OutputKind::Logits => {
                    assert_eq!(p.score, s[p.class]);
                    assert!(s.iter().all(|&v| v <= p.score));
                }
            }
        }
    }
}

/// Whether `input` is integer features (`Input::I16` or `Input::U8`), which an int8 blob
/// without the integer input path refuses (format version 5).
fn integer(input: Input<'_>) -> bool {
    matches!(input, Input::I16(_) | Input::U8(_))
}

/// `classify` on the same call as `infer` (`r`, which wrote `scores`): the same refusals,
/// except that it has no scores to be short of, and infer's class whenever infer's top score
/// is unique (a tie there can be float rounding that the integer argmax does not have).
fn check_classify(
    model: &Model<'_>,
    input: Input<'_>,
    scratch_len: usize,
    (n_in, nonfinite_at): (usize, Option<usize>),
    r: &Result<kinglet_runtime::Prediction, RunError>,
    scores: &[f32],
) {
    let mut scratch = vec![0u8; scratch_len];
    let c = model.classify(input, &mut scratch);
    if n_in != model.input_len() {
        assert!(matches!(c, Err(RunError::InputLength { .. })), "{c:?}");
    } else if integer(input) && !model.takes_integer_input() {
        assert_eq!(c, Err(RunError::NoIntegerInput));
    } else if scratch_len < model.scratch_bytes() {
        assert!(matches!(c, Err(RunError::ScratchTooSmall { .. })), "{c:?}");
    } else if let Some(i) = nonfinite_at {
        assert_eq!(c, Err(RunError::NonFiniteInput { index: i as u32 }));
    } else if c == Err(RunError::NonFiniteOutput) {
        assert_eq!(model.precision(), kinglet_runtime::Precision::F32);
    } else {
        let class = c.unwrap_or_else(|e| panic!("classify refused a good call: {e:?}"));
        assert!(
            class < model.classes(),
            "class {class} of {}",
            model.classes()
        );
        if let Ok(p) = r {
            let unique = match model.desc().output {
                OutputKind::Sigmoid => p.score != 0.5,
                _ => scores.iter().filter(|&&v| v == p.score).count() == 1,
            };
            if unique {
                assert_eq!(
                    class, p.class,
                    "classify vs infer ({p:?}, scores {scores:?})"
                );
            }
        }
    }
}

/// Runs the extreme inputs every accepted model must survive with a right-sized scratch buffer.
pub fn run_extremes(model: &Model<'_>) {
    let n = model.input_len();
    let (scratch, scores) = (model.scratch_bytes(), model.output_len());
    for v in [0.0f32, 1.0, -1.0, 1e30, -1e30, f32::MAX, f32::MIN, 1e-40] {
        run_checked(model, Input::F32(&vec![v; n]), scratch, scores);
    }
    for v in [i16::MIN, i16::MAX, 0, -1] {
        run_checked(model, Input::I16(&vec![v; n]), scratch, scores);
    }
    for v in [0u8, 255] {
        run_checked(model, Input::U8(&vec![v; n]), scratch, scores);
    }
    let alt: Vec<i16> = (0..n)
        .map(|i| if i % 2 == 0 { i16::MIN } else { i16::MAX })
        .collect();
    run_checked(model, Input::I16(&alt), scratch, scores);
}

/// Builds `count` inputs of the kind `kind % 3` (0: f32, 1: i16, 2: u8) from `bytes` (cycled,
/// little-endian) and runs them with [`run_checked`].
pub fn run_from_bytes(
    model: &Model<'_>,
    kind: u8,
    count: usize,
    bytes: &[u8],
    scratch_len: usize,
    scores_len: usize,
) {
    let byte = |i: usize| bytes.get(i % bytes.len().max(1)).copied().unwrap_or(0);
    match kind % 3 {
        0 => {
            let v: Vec<f32> = (0..count)
                .map(|i| {
                    f32::from_le_bytes([
                        byte(4 * i),
                        byte(4 * i + 1),
                        byte(4 * i + 2),
                        byte(4 * i + 3),
                    ])
                })
                .collect();
            run_checked(model, Input::F32(&v), scratch_len, scores_len);
        }
        1 => {
            let v: Vec<i16> = (0..count)
                .map(|i| i16::from_le_bytes([byte(2 * i), byte(2 * i + 1)]))
                .collect();
            run_checked(model, Input::I16(&v), scratch_len, scores_len);
        }
        _ => {
            let v: Vec<u8> = (0..count).map(byte).collect();
            run_checked(model, Input::U8(&v), scratch_len, scores_len);
        }
    }
}
