//! An index over a `GraphProto`: who produces and who consumes each value, which values are
//! constants (initializers and `Constant` nodes), and structural checks done once up front:
//! one data input, every value defined once, every input defined, no cycle (Kahn's algorithm,
//! bounded by the node count), every node reachable from the data input or computing a
//! constant that the model reads. Nodes of the second kind are folded here (`fold.rs`), so
//! their outputs are constants like initializers.

use std::collections::{HashMap, HashSet, VecDeque};

use super::attr;
use super::error::OnnxImportError;
use super::fold::{self, FOLDABLE_OPS};
use super::node::{Domain, Node};
use super::proto::{GraphProto, TensorProto, ValueInfoProto};
use super::tensor::{decode, Tensor, TensorData};

/// Where a constant value comes from.
#[derive(Debug, Clone)]
enum ConstSource<'g> {
    Initializer(&'g TensorProto),
    ConstantNode(Node<'g>),
    /// The output of a node folded at import.
    Folded(Tensor),
}

/// Lookup tables over one graph.
#[derive(Debug)]
pub struct GraphIndex<'g> {
    /// All nodes, in file order.
    pub nodes: Vec<Node<'g>>,
    /// The one graph input that is not an initializer.
    pub input: &'g ValueInfoProto,
    /// Its name.
    pub input_name: &'g str,
    /// Graph output names, in order.
    pub outputs: Vec<&'g str>,
    consumers: HashMap<&'g str, Vec<usize>>,
    constants: HashMap<&'g str, ConstSource<'g>>,
    /// Per node: it computes a constant (a `Constant` node or a node folded at import).
    constant_nodes: Vec<bool>,
}

/// True for a `Constant` node of the default domain.
pub fn is_constant_node(n: &Node<'_>) -> bool {
    n.domain() == Domain::Onnx && n.op() == "Constant"
}

impl<'g> GraphIndex<'g> {
    /// Builds the index and runs the structural checks.
    pub fn build(graph: &'g GraphProto) -> Result<Self, OnnxImportError> {
        if graph.node.is_empty() {
            return Err(OnnxImportError::EmptyGraph);
        }
        let nodes: Vec<Node<'g>> = graph
            .node
            .iter()
            .enumerate()
            .map(|(index, proto)| Node { proto, index })
            .collect();

        // Definitions: initializers, the data input, node outputs.
        let mut defined: HashMap<&'g str, String> = HashMap::new();
        let mut constants = HashMap::new();
        for t in &graph.initializer {
            let name = t.name.as_deref().unwrap_or("");
            if defined
                .insert(name, format!("initializer '{name}'"))
                .is_some()
            {
                return Err(OnnxImportError::DuplicateValue {
                    value: name.into(),
                    first: format!("initializer '{name}'"),
                    second: format!("initializer '{name}'"),
                });
            }
            constants.insert(name, ConstSource::Initializer(t));
        }
        let data_inputs: Vec<&ValueInfoProto> = graph
            .input
            .iter()
            .filter(|v| !constants.contains_key(v.name.as_deref().unwrap_or("")))
            .collect();
        let input = match data_inputs.as_slice() {
            [one] => *one,
            _ => {
                return Err(OnnxImportError::Inputs {
                    names: data_inputs
                        .iter()
                        .map(|v| format!("'{}'", v.name.as_deref().unwrap_or("")))
                        .collect(),
                })
            }
        };
        let input_name = input.name.as_deref().unwrap_or("");
        defined.insert(input_name, format!("graph input '{input_name}'"));

        let mut producer: HashMap<&'g str, usize> = HashMap::new();
        for n in &nodes {
            for out in n.outputs().iter().filter(|o| !o.is_empty()) {
                if let Some(first) = defined.get(out.as_str()) {
                    return Err(OnnxImportError::DuplicateValue {
                        value: out.clone(),
                        first: first.clone(),
                        second: format!("node {}", n.node_ref()),
                    });
                }
                defined.insert(out, format!("node {}", n.node_ref()));
                producer.insert(out, n.index);
                if is_constant_node(n) {
                    constants.insert(out, ConstSource::ConstantNode(*n));
                }
            }
        }

        // Uses: every input must be defined; each node is listed once per distinct input.
        let mut consumers: HashMap<&'g str, Vec<usize>> = HashMap::new();
        let mut indegree = vec![0usize; nodes.len()];
        let mut successors: Vec<Vec<usize>> = vec![Vec::new(); nodes.len()];
        for n in &nodes {
            let mut seen = HashSet::new();
            for inp in n.inputs().iter().filter(|i| !i.is_empty()) {
                if !seen.insert(inp.as_str()) {
                    continue;
                }
                if !defined.contains_key(inp.as_str()) {
                    return Err(OnnxImportError::UndefinedValue {
                        node: n.node_ref(),
                        value: inp.clone(),
                    });
                }
                consumers.entry(inp).or_default().push(n.index);
                if let Some(&p) = producer.get(inp.as_str()) {
                    if let (Some(d), Some(s)) = (indegree.get_mut(n.index), successors.get_mut(p)) {
                        *d += 1;
                        s.push(n.index);
                    }
                }
            }
        }

        // Kahn's algorithm: each node is taken from the queue at most once, so this loop runs
        // at most `nodes.len()` times.
        let mut queue: VecDeque<usize> = indegree
            .iter()
            .enumerate()
            .filter(|(_, &d)| d == 0)
            .map(|(i, _)| i)
            .collect();
        let mut done = vec![false; nodes.len()];
        let mut order = Vec::with_capacity(nodes.len());
        while let Some(i) = queue.pop_front() {
            if let Some(d) = done.get_mut(i) {
                *d = true;
            }
            order.push(i);
            for &s in successors.get(i).map(Vec::as_slice).unwrap_or(&[]) {
                if let Some(d) = indegree.get_mut(s) {
                    *d = d.saturating_sub(1);
                    if *d == 0 {
                        queue.push_back(s);
                    }
                }
            }
        }
        if let Some(n) = nodes
            .iter()
            .find(|n| !done.get(n.index).copied().unwrap_or(false))
        {
            return Err(OnnxImportError::Cycle { node: n.node_ref() });
        }

        // Reachability from the data input (each node visited once).
        let mut reached = vec![false; nodes.len()];
        let mut frontier = vec![input_name];
        while let Some(v) = frontier.pop() {
            for &c in consumers.get(v).map(Vec::as_slice).unwrap_or(&[]) {
                if let Some(r) = reached.get_mut(c) {
                    if !*r {
                        *r = true;
                        if let Some(n) = nodes.get(c) {
                            frontier.extend(
                                n.outputs()
                                    .iter()
                                    .filter(|o| !o.is_empty())
                                    .map(String::as_str),
                            );
                        }
                    }
                }
            }
        }
        let constant_nodes = fold_constants(
            &nodes,
            &order,
            &reached,
            &producer,
            &mut constants,
            input_name,
        )?;

        let outputs: Vec<&'g str> = graph
            .output
            .iter()
            .map(|o| o.name.as_deref().unwrap_or(""))
            .collect();
        if outputs.is_empty() {
            return Err(OnnxImportError::Output {
                detail: "the graph declares no outputs".into(),
            });
        }
        for o in &outputs {
            if !producer.contains_key(o) {
                return Err(OnnxImportError::Output {
                    detail: format!("graph output '{o}' is not produced by any node; supported: outputs computed by the graph"),
                });
            }
        }

        Ok(GraphIndex {
            nodes,
            input,
            input_name,
            outputs,
            consumers,
            constants,
            constant_nodes,
        })
    }

    /// True when node `index` computes a constant: a `Constant` node, or one folded at import.
    pub fn computes_constant(&self, index: usize) -> bool {
        self.constant_nodes.get(index).copied().unwrap_or(false)
    }

    /// Indices of the nodes that read `value`.
    pub fn consumers(&self, value: &str) -> &[usize] {
        self.consumers.get(value).map(Vec::as_slice).unwrap_or(&[])
    }

    /// The node at an index.
    pub fn node(&self, index: usize) -> Option<Node<'g>> {
        self.nodes.get(index).copied()
    }

    /// True when `value` is a graph output.
    pub fn is_graph_output(&self, value: &str) -> bool {
        self.outputs.contains(&value)
    }

    /// True when `value` is read by a node or is a graph output.
    pub fn is_used(&self, value: &str) -> bool {
        !self.consumers(value).is_empty() || self.is_graph_output(value)
    }

    /// Decodes a constant value; `None` when `value` is not a constant.
    pub fn constant(&self, value: &str) -> Option<Result<Tensor, String>> {
        Some(match self.constants.get(value)? {
            ConstSource::Initializer(t) => decode(t),
            ConstSource::ConstantNode(n) => constant_node_value(n, value),
            ConstSource::Folded(t) => Ok(t.clone()),
        })
    }
}

/// The nodes that do not depend on the data input: those whose outputs the model reads
/// (directly or through other such nodes) are folded, in topological `order`; any other is
/// disconnected. Returns, per node, whether it computes a constant.
fn fold_constants<'g>(
    nodes: &[Node<'g>],
    order: &[usize],
    reached: &[bool],
    producer: &HashMap<&'g str, usize>,
    constants: &mut HashMap<&'g str, ConstSource<'g>>,
    input_name: &str,
) -> Result<Vec<bool>, OnnxImportError> {
    let is_reached = |i: usize| reached.get(i).copied().unwrap_or(false);
    // Which unreached nodes feed a reached one: walk back from the reached nodes' inputs.
    let mut feeds = vec![false; nodes.len()];
    let mut stack: Vec<usize> = Vec::new();
    let push_producers = |n: &Node<'g>, stack: &mut Vec<usize>, feeds: &mut Vec<bool>| {
        for inp in n.inputs() {
            if let Some(&p) = producer.get(inp.as_str()) {
                if let Some(f) = feeds.get_mut(p) {
                    if !is_reached(p) && !*f {
                        *f = true;
                        stack.push(p);
                    }
                }
            }
        }
    };
    for n in nodes.iter().filter(|n| is_reached(n.index)) {
        push_producers(n, &mut stack, &mut feeds);
    }
    // Each node is pushed at most once (marked before it is pushed).
    while let Some(i) = stack.pop() {
        if let Some(n) = nodes.get(i) {
            push_producers(n, &mut stack, &mut feeds);
        }
    }

    let mut constant_nodes = vec![false; nodes.len()];
    for &i in order {
        let Some(n) = nodes.get(i) else { continue };
        if is_reached(i) {
            continue;
        }
        if is_constant_node(n) {
            if let Some(c) = constant_nodes.get_mut(i) {
                *c = true;
            }
            continue;
        }
        if !feeds.get(i).copied().unwrap_or(false) {
            return Err(OnnxImportError::Disconnected {
                node: n.node_ref(),
                detail: format!("it does not depend on graph input '{input_name}'"),
            });
        }
        if !fold::is_foldable(n) {
            return Err(n.err(format!(
                "op {} computes a constant (it does not depend on graph input '{input_name}') but is not folded at import; folded: {FOLDABLE_OPS} of constants",
                n.op()
            )));
        }
        if n.outputs().len() != 1 {
            return Err(n.err(format!(
                "{} outputs; supported: one when folded at import",
                n.outputs().len()
            )));
        }
        let mut values = Vec::with_capacity(n.inputs().len());
        for inp in n.inputs() {
            if inp.is_empty() {
                values.push(None);
                continue;
            }
            let v = match constants.get(inp.as_str()) {
                Some(ConstSource::Initializer(t)) => decode(t),
                Some(ConstSource::ConstantNode(c)) => constant_node_value(c, inp),
                Some(ConstSource::Folded(t)) => Ok(t.clone()),
                None => Err(format!("input '{inp}' is not a constant")),
            };
            values.push(Some(
                v.map_err(|e| n.err(format!("folding at import: {e}")))?,
            ));
        }
        let out = fold::fold(n, &values).map_err(|e| n.err(format!("folding at import: {e}")))?;
        if let Some(name) = n.outputs().first() {
            constants.insert(name.as_str(), ConstSource::Folded(out));
        }
        if let Some(c) = constant_nodes.get_mut(i) {
            *c = true;
        }
    }
    Ok(constant_nodes)
}

/// The value of a `Constant` node, from whichever `value*` attribute it has.
fn constant_node_value(n: &Node<'_>, out: &str) -> Result<Tensor, String> {
    let named = |dims: Vec<usize>, data| Tensor {
        name: out.to_string(),
        dims,
        data,
    };
    let p = n.proto;
    if let Some(mut t) = attr::tensor(p, "value")? {
        // Messages name the value the graph reads, not the attribute tensor's own name.
        t.name = out.to_string();
        return Ok(t);
    }
    if let Some(v) = attr::float(p, "value_float")? {
        return Ok(named(vec![], TensorData::Float(vec![v])));
    }
    if let Some(v) = attr::floats(p, "value_floats")? {
        return Ok(named(vec![v.len()], TensorData::Float(v)));
    }
    if let Some(v) = attr::int(p, "value_int")? {
        return Ok(named(vec![], TensorData::Int(vec![v])));
    }
    if let Some(v) = attr::ints(p, "value_ints")? {
        return Ok(named(vec![v.len()], TensorData::Int(v)));
    }
    if let Some(v) = attr::strings(p, "value_strings")?.or(attr::strings(p, "value_string")?) {
        let dims = if attr::find(p, "value_string").is_some() {
            vec![]
        } else {
            vec![v.len()]
        };
        return Ok(named(dims, TensorData::Str(v)));
    }
    Err(format!(
        "Constant node {} has no supported value attribute; supported: value, value_float(s), value_int(s), value_string(s)",
        n.node_ref()
    ))
}

#[cfg(test)]
mod tests {
    use super::super::test_graph::*;
    use super::*;

    fn relu_chain() -> GraphProto {
        graph(
            vec![
                node("a", "Relu", &["x"], &["y"]),
                node("b", "Relu", &["y"], &["z"]),
            ],
            vec![floats("w", &[1], &[1.0])],
            vec![value("x", &[0, 2]), value("w", &[1])],
            &["z"],
        )
    }

    #[test]
    fn indexes_consumers_and_skips_initializers_listed_as_inputs() {
        let g = relu_chain();
        let ix = GraphIndex::build(&g).unwrap();
        assert_eq!(ix.input_name, "x");
        assert_eq!(ix.consumers("x"), &[0]);
        assert_eq!(ix.consumers("y"), &[1]);
        assert!(ix.consumers("z").is_empty());
        assert!(ix.is_graph_output("z") && ix.is_used("z") && !ix.is_used("nothing"));
        assert!(ix.constant("w").is_some_and(|t| t.is_ok()));
        assert!(ix.constant("y").is_none());
    }

    #[test]
    fn constant_node_values() {
        let mut c = node("c", "Constant", &[], &["k"]);
        c.attribute.push(attr_floats("value_floats", &[1.0, 2.0]));
        let mut g = relu_chain();
        g.node.insert(0, c);
        let ix = GraphIndex::build(&g).unwrap();
        let t = ix.constant("k").unwrap().unwrap();
        assert_eq!(
            (t.dims.clone(), t.finite_floats().unwrap().to_vec()),
            (vec![2], vec![1.0, 2.0])
        );
    }

    #[test]
    fn constant_subgraphs_are_folded_in_order() {
        // Identity(Transpose(w)) feeds the chain; the nodes come before their inputs in the file.
        let g = graph(
            vec![
                node("id", "Identity", &["wt"], &["w2"]),
                node("tr", "Transpose", &["w"], &["wt"]),
                node("a", "Relu", &["x"], &["y"]),
                node("mm", "MatMul", &["y", "w2"], &["z"]),
            ],
            vec![floats("w", &[1, 2], &[3.0, 4.0])],
            vec![value("x", &[0, 2])],
            &["z"],
        );
        let ix = GraphIndex::build(&g).unwrap();
        let t = ix.constant("w2").unwrap().unwrap();
        assert_eq!((t.dims.clone(), t.name.as_str()), (vec![2, 1], "w2"));
        assert!(ix.computes_constant(0) && ix.computes_constant(1));
        assert!(!ix.computes_constant(2) && !ix.computes_constant(3));

        // An op that is not folded, on constants the model reads: refused naming it.
        let mut g2 = g.clone();
        g2.node[1] = node("sin", "Sin", &["w"], &["wt"]);
        let e = GraphIndex::build(&g2).unwrap_err().to_string();
        assert!(
            e.contains("'sin' (op Sin") && e.contains("not folded at import"),
            "{e}"
        );
        // A fold that fails names the node too.
        let mut g3 = g.clone();
        g3.node[1] = with_attr(
            node("tr", "Transpose", &["w"], &["wt"]),
            attr_int("perm", 0),
        );
        let e = GraphIndex::build(&g3).unwrap_err().to_string();
        assert!(
            e.contains("'tr' (op Transpose") && e.contains("permutation"),
            "{e}"
        );
    }

    #[test]
    fn cycle_is_found_without_looping() {
        let g = graph(
            vec![
                node("a", "Relu", &["x", "q"], &["p"]),
                node("b", "Relu", &["p"], &["q"]),
            ],
            vec![],
            vec![value("x", &[0, 2])],
            &["q"],
        );
        let e = GraphIndex::build(&g).unwrap_err();
        assert!(matches!(e, OnnxImportError::Cycle { .. }), "{e}");
        assert!(
            e.to_string().contains("cycle through node 'a' (op Relu"),
            "{e}"
        );
    }

    #[test]
    fn structural_errors() {
        let mut g = relu_chain();
        g.input.push(value("x2", &[0, 2]));
        assert!(
            matches!(GraphIndex::build(&g), Err(OnnxImportError::Inputs { names }) if names.len() == 2)
        );

        let mut g = relu_chain();
        g.node.push(node("dup", "Relu", &["x"], &["y"]));
        let e = GraphIndex::build(&g).unwrap_err();
        assert!(
            matches!(e, OnnxImportError::DuplicateValue { .. }) && e.to_string().contains("'dup'"),
            "{e}"
        );

        let mut g = relu_chain();
        g.node.push(node("u", "Relu", &["ghost"], &["u1"]));
        let e = GraphIndex::build(&g).unwrap_err();
        assert!(
            matches!(e, OnnxImportError::UndefinedValue { .. })
                && e.to_string().contains("'ghost'"),
            "{e}"
        );

        let mut g = relu_chain();
        g.node.push(node("island", "Relu", &["w"], &["i1"]));
        let e = GraphIndex::build(&g).unwrap_err();
        assert!(
            matches!(e, OnnxImportError::Disconnected { .. }) && e.to_string().contains("'island'"),
            "{e}"
        );

        let mut g = relu_chain();
        g.output.push(ValueInfoProto {
            name: Some("nowhere".into()),
            r#type: None,
        });
        assert!(matches!(
            GraphIndex::build(&g),
            Err(OnnxImportError::Output { .. })
        ));

        let g = graph(vec![], vec![], vec![value("x", &[0, 2])], &["x"]);
        assert!(matches!(
            GraphIndex::build(&g),
            Err(OnnxImportError::EmptyGraph)
        ));
    }
}
